#pragma once
// Internal to the report: the small amount of SVG drawing the HTML report needs (axes with
// round ticks, markers, lines). Output is inline SVG for an HTML5 document: no xmlns, no
// scripts, no external references; every text passes through HtmlEscape.

#include <string>
#include <string_view>
#include <vector>

namespace stepledger::report_detail {

/// An SVG coordinate or attribute number: at most two decimals, no separators, no "-0" (two
/// decimals of a user unit are far below what a screen or printer resolves).
std::string SvgNumber(double value);

/// HTML-escapes & < > " ' (text content and attribute values alike).
std::string HtmlEscape(std::string_view text);

/// An axis from lo to hi with "nice" round ticks (1, 2, 2.5 or 5 times a power of ten).
struct AxisScale {
  double lo = 0;
  double hi = 1;
  double step = 0.2;
  std::vector<double> ticks;
};

/// A scale covering [data_lo, data_hi] (widened to round ticks) with about target_ticks ticks.
/// Degenerate data (lo == hi, or non-finite) gets a unit-wide range around the value.
AxisScale NiceScale(double data_lo, double data_hi, int target_ticks = 5);

/// A tick label through engine/number_format.h: FormatFixed with as few decimals as the step
/// needs (thousands as 12,500); FormatQuantity for very large or very small values.
std::string FormatTick(double value, double step);

enum class MarkerShape { kCircle, kSquare, kDiamond, kTriangleUp, kTriangleDown, kCross };

/// One data point: a shape centred at (x, y) with radius r (user units), class css_class and,
/// when title is not empty, a <title> child (shown on hover). title is escaped here.
std::string Marker(MarkerShape shape, double x, double y, double r, std::string_view css_class,
                   std::string_view title = {});

/// "x1,y1 x2,y2 ..." for a polyline's points attribute.
std::string PointList(const std::vector<std::pair<double, double>>& points);

/// Plot area of an x-y chart: maps data to SVG user units and draws the frame.
class XyPlot {
 public:
  struct Layout {
    double width = 720;
    double height = 380;
    double left = 84;
    double right = 24;
    double top = 44;
    double bottom = 60;
  };
  XyPlot(Layout layout, AxisScale x, AxisScale y);

  double X(double value) const;
  double Y(double value) const;
  const Layout& layout() const { return layout_; }
  const AxisScale& x_scale() const { return x_; }
  const AxisScale& y_scale() const { return y_; }

  /// <svg> start tag (viewBox, width 100%, role img, aria-label), the <title>, the heading
  /// text, grid lines, axes, tick labels and axis labels. css_class names the chart.
  std::string Begin(std::string_view css_class, std::string_view title, std::string_view x_label,
                    std::string_view y_label) const;
  /// A horizontal reference line at data y with a short label at its right end.
  std::string HorizontalLine(double y, std::string_view css_class, std::string_view label) const;
  /// A vertical reference line at data x with a short label at its top.
  std::string VerticalLine(double x, std::string_view css_class, std::string_view label) const;
  static std::string End() { return "</svg>\n"; }

 private:
  Layout layout_;
  AxisScale x_, y_;
};

}  // namespace stepledger::report_detail

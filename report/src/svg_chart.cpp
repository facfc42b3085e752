#include "svg_chart.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "stepledger/engine/number_format.h"

namespace stepledger::report_detail {
namespace {

std::string Num(double value) {
  // Two decimals of a user unit are far below what a screen or printer resolves.
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.2f", value);
  std::string text = buffer;
  while (!text.empty() && text.back() == '0') text.pop_back();
  if (!text.empty() && text.back() == '.') text.pop_back();
  if (text == "-0") text = "0";
  return text;
}

}  // namespace

std::string SvgNumber(double value) { return Num(value); }

std::string HtmlEscape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (const char character : text) {
    switch (character) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += character;
    }
  }
  return out;
}

AxisScale NiceScale(double data_lo, double data_hi, int target_ticks) {
  AxisScale scale;
  if (!std::isfinite(data_lo) || !std::isfinite(data_hi)) {
    data_lo = 0;
    data_hi = 1;
  }
  if (data_lo > data_hi) std::swap(data_lo, data_hi);
  if (data_hi - data_lo <= 1e-12 * std::max(1.0, std::abs(data_hi))) {
    const double pad = data_lo == 0 ? 1.0 : std::abs(data_lo) * 0.1;
    data_lo -= pad;
    data_hi += pad;
  }
  target_ticks = std::max(2, target_ticks);
  const double raw_step = (data_hi - data_lo) / target_ticks;
  const double magnitude = std::pow(10.0, std::floor(std::log10(raw_step)));
  double step = magnitude;
  for (const double multiple : {1.0, 2.0, 2.5, 5.0, 10.0}) {
    step = multiple * magnitude;
    if (step >= raw_step) break;
  }
  scale.step = step;
  scale.lo = std::floor(data_lo / step) * step;
  scale.hi = std::ceil(data_hi / step) * step;
  const long count = std::lround((scale.hi - scale.lo) / step);
  for (long index = 0; index <= count; ++index) scale.ticks.push_back(scale.lo + index * step);
  return scale;
}

std::string FormatTick(double value, double step) {
  if (std::abs(value) < step * 1e-9) value = 0;
  const double largest = std::max(std::abs(value), step);
  if (largest >= 1e7 || step < 1e-5) return FormatQuantity(value, 3);
  int decimals = 0;
  while (decimals < 6) {
    const double scaled = step * std::pow(10.0, decimals);
    if (std::abs(scaled - std::round(scaled)) < 1e-6 * std::max(1.0, scaled)) break;
    ++decimals;
  }
  return FormatFixed(value, decimals);
}

std::string Marker(MarkerShape shape, double x, double y, double r, std::string_view css_class,
                   std::string_view title) {
  std::ostringstream out;
  const std::string cls = " class=\"" + HtmlEscape(css_class) + "\"";
  const std::string inner = title.empty() ? "" : "<title>" + HtmlEscape(title) + "</title>";
  auto close = [&](const std::string& tag) {
    if (inner.empty()) {
      out << "/>";
    } else {
      out << ">" << inner << "</" << tag << ">";
    }
  };
  switch (shape) {
    case MarkerShape::kCircle:
      out << "<circle" << cls << " cx=\"" << Num(x) << "\" cy=\"" << Num(y) << "\" r=\"" << Num(r) << "\"";
      close("circle");
      break;
    case MarkerShape::kSquare:
      out << "<rect" << cls << " x=\"" << Num(x - r) << "\" y=\"" << Num(y - r) << "\" width=\""
          << Num(2 * r) << "\" height=\"" << Num(2 * r) << "\"";
      close("rect");
      break;
    case MarkerShape::kDiamond:
    case MarkerShape::kTriangleUp:
    case MarkerShape::kTriangleDown: {
      std::vector<std::pair<double, double>> points;
      const double d = r * 1.3;
      if (shape == MarkerShape::kDiamond) {
        points = {{x, y - d}, {x + d, y}, {x, y + d}, {x - d, y}};
      } else if (shape == MarkerShape::kTriangleUp) {
        points = {{x, y - d}, {x + d, y + d * 0.8}, {x - d, y + d * 0.8}};
      } else {
        points = {{x, y + d}, {x + d, y - d * 0.8}, {x - d, y - d * 0.8}};
      }
      out << "<polygon" << cls << " points=\"" << PointList(points) << "\"";
      close("polygon");
      break;
    }
    case MarkerShape::kCross:
      out << "<path" << cls << " d=\"M" << Num(x - r) << " " << Num(y - r) << "L" << Num(x + r) << " "
          << Num(y + r) << "M" << Num(x - r) << " " << Num(y + r) << "L" << Num(x + r) << " "
          << Num(y - r) << "\"";
      close("path");
      break;
  }
  return out.str();
}

std::string PointList(const std::vector<std::pair<double, double>>& points) {
  std::string text;
  for (const auto& [x, y] : points) {
    if (!text.empty()) text += ' ';
    text += Num(x) + "," + Num(y);
  }
  return text;
}

XyPlot::XyPlot(Layout layout, AxisScale x, AxisScale y)
    : layout_(layout), x_(std::move(x)), y_(std::move(y)) {}

double XyPlot::X(double value) const {
  const double span = layout_.width - layout_.left - layout_.right;
  return layout_.left + (value - x_.lo) / (x_.hi - x_.lo) * span;
}

double XyPlot::Y(double value) const {
  const double span = layout_.height - layout_.top - layout_.bottom;
  return layout_.height - layout_.bottom - (value - y_.lo) / (y_.hi - y_.lo) * span;
}

std::string XyPlot::Begin(std::string_view css_class, std::string_view title,
                          std::string_view x_label, std::string_view y_label) const {
  std::ostringstream out;
  const Layout& l = layout_;
  out << "<svg class=\"chart " << HtmlEscape(css_class) << "\" viewBox=\"0 0 " << Num(l.width) << " "
      << Num(l.height) << "\" width=\"100%\" role=\"img\" aria-label=\"" << HtmlEscape(title)
      << "\"><title>" << HtmlEscape(title) << "</title>\n";
  out << "<text class=\"chart-title\" x=\"" << Num(l.left) << "\" y=\"22\">" << HtmlEscape(title)
      << "</text>\n";
  const double x0 = l.left, x1 = l.width - l.right;
  const double y0 = l.height - l.bottom, y1 = l.top;
  out << "<g class=\"grid\">";
  for (const double tick : x_.ticks) {
    out << "<line x1=\"" << Num(X(tick)) << "\" y1=\"" << Num(y0) << "\" x2=\"" << Num(X(tick))
        << "\" y2=\"" << Num(y1) << "\"/>";
  }
  for (const double tick : y_.ticks) {
    out << "<line x1=\"" << Num(x0) << "\" y1=\"" << Num(Y(tick)) << "\" x2=\"" << Num(x1)
        << "\" y2=\"" << Num(Y(tick)) << "\"/>";
  }
  out << "</g>\n<g class=\"axis\"><line x1=\"" << Num(x0) << "\" y1=\"" << Num(y0) << "\" x2=\""
      << Num(x1) << "\" y2=\"" << Num(y0) << "\"/><line x1=\"" << Num(x0) << "\" y1=\"" << Num(y0)
      << "\" x2=\"" << Num(x0) << "\" y2=\"" << Num(y1) << "\"/>";
  for (const double tick : x_.ticks) {
    out << "<line x1=\"" << Num(X(tick)) << "\" y1=\"" << Num(y0) << "\" x2=\"" << Num(X(tick))
        << "\" y2=\"" << Num(y0 + 5) << "\"/><text class=\"tick\" x=\"" << Num(X(tick)) << "\" y=\""
        << Num(y0 + 18) << "\" text-anchor=\"middle\">" << HtmlEscape(FormatTick(tick, x_.step))
        << "</text>";
  }
  for (const double tick : y_.ticks) {
    out << "<line x1=\"" << Num(x0 - 5) << "\" y1=\"" << Num(Y(tick)) << "\" x2=\"" << Num(x0)
        << "\" y2=\"" << Num(Y(tick)) << "\"/><text class=\"tick\" x=\"" << Num(x0 - 8) << "\" y=\""
        << Num(Y(tick) + 4) << "\" text-anchor=\"end\">" << HtmlEscape(FormatTick(tick, y_.step))
        << "</text>";
  }
  out << "</g>\n<text class=\"axis-label\" x=\"" << Num((x0 + x1) / 2) << "\" y=\"" << Num(l.height - 14)
      << "\" text-anchor=\"middle\">" << HtmlEscape(x_label) << "</text>\n";
  out << "<text class=\"axis-label\" transform=\"translate(16 " << Num((y0 + y1) / 2)
      << ") rotate(-90)\" text-anchor=\"middle\">" << HtmlEscape(y_label) << "</text>\n";
  return out.str();
}

std::string XyPlot::HorizontalLine(double y, std::string_view css_class, std::string_view label) const {
  std::ostringstream out;
  out << "<line class=\"" << HtmlEscape(css_class) << "\" x1=\"" << Num(layout_.left) << "\" y1=\""
      << Num(Y(y)) << "\" x2=\"" << Num(layout_.width - layout_.right) << "\" y2=\"" << Num(Y(y))
      << "\"/>";
  if (!label.empty()) {
    out << "<text class=\"ref-label\" x=\"" << Num(layout_.width - layout_.right - 4) << "\" y=\""
        << Num(Y(y) - 4) << "\" text-anchor=\"end\">" << HtmlEscape(label) << "</text>";
  }
  return out.str() + "\n";
}

std::string XyPlot::VerticalLine(double x, std::string_view css_class, std::string_view label) const {
  std::ostringstream out;
  out << "<line class=\"" << HtmlEscape(css_class) << "\" x1=\"" << Num(X(x)) << "\" y1=\""
      << Num(layout_.top) << "\" x2=\"" << Num(X(x)) << "\" y2=\""
      << Num(layout_.height - layout_.bottom) << "\"/>";
  if (!label.empty()) {
    out << "<text class=\"ref-label\" x=\"" << Num(X(x) + 4) << "\" y=\"" << Num(layout_.top + 12)
        << "\">" << HtmlEscape(label) << "</text>";
  }
  return out.str() + "\n";
}

}  // namespace stepledger::report_detail

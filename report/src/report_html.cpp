// The HTML back end: the report model as one self-contained HTML5 file — inline <style>, inline
// SVG, no scripts and no reference to anything outside the file. Every text goes through
// HtmlEscape; every data point carries class="pt <kind>" (the tests count them).

#include <algorithm>
#include <cmath>
#include <sstream>

#include "report_internal.h"
#include "stepledger/engine/number_format.h"
#include "svg_chart.h"

namespace stepledger {
namespace {

using namespace report_detail;

// Okabe–Ito colours (chosen to stay distinct for the common colour-vision deficiencies), and
// every series also differs by marker shape or line dash so that colour is never the only cue.
constexpr const char* kStyle = R"css(
:root { --ink: #1f2328; --muted: #59606a; --rule: #cfd3d8; --blue: #0072B2; --sky: #56B4E9;
        --green: #009E73; --orange: #E69F00; --vermillion: #D55E00; --purple: #CC79A7; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fcfcfa;
       font: 16px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
main { max-width: 64rem; margin: 0 auto; padding: 1rem 1.25rem 3rem; }
h1 { font-size: 1.65rem; margin: .5rem 0 .25rem; }
h2 { font-size: 1.25rem; margin: 2.25rem 0 .75rem; padding-bottom: .2rem;
     border-bottom: 2px solid var(--blue); }
h3 { font-size: 1.02rem; margin: 1.4rem 0 .4rem; }
p.meta { color: var(--muted); margin-top: 0; }
nav ol { columns: 2 12rem; padding-left: 1.2rem; margin: .5rem 0; }
nav a { color: var(--blue); }
.table-wrap { overflow-x: auto; margin: .5rem 0 1rem; }
table { border-collapse: collapse; font-size: .88rem; }
th, td { padding: .22rem .6rem; border-bottom: 1px solid var(--rule); text-align: left;
         vertical-align: top; }
th { border-bottom: 2px solid var(--ink); font-weight: 600; white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.chosen td { font-weight: 600; }
tr.ineligible td { color: var(--muted); }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem; margin: .5rem 0; }
dl.facts dt { font-weight: 600; }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
.cautions { border: 3px solid var(--vermillion); border-radius: .4rem; padding: .25rem 1rem .75rem;
            margin: 1.5rem 0; }
.cautions h2 { border-bottom: none; margin-top: .5rem; }
.cautions li { margin: .35rem 0; }
.unverified { border: 4px solid var(--vermillion); background: #fff3ec; padding: .5rem 1rem; margin: 1rem 0; }
.unverified p:first-child { font-weight: 700; color: var(--vermillion); }
details { margin: .25rem 0 .75rem; }
summary { cursor: pointer; color: var(--muted); }
.kind { display: inline-block; font-family: ui-monospace, monospace; font-size: .82rem;
        border: 1px solid var(--vermillion); border-radius: .25rem; padding: 0 .3rem; margin-right: .4rem; }
.digest, code { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .85rem;
                overflow-wrap: anywhere; }
.bad { color: var(--vermillion); font-weight: 700; }
.note { color: var(--muted); font-size: .92rem; }
figure { margin: 1rem 0 1.5rem; break-inside: avoid; page-break-inside: avoid; }
figcaption { color: var(--muted); font-size: .88rem; margin-top: .25rem; }
svg.chart { display: block; width: 100%; height: auto; font-family: inherit; }
svg .chart-title { font-size: 15px; font-weight: 600; fill: var(--ink); }
svg .tick { font-size: 11px; fill: var(--muted); }
svg .axis-label { font-size: 12.5px; fill: var(--ink); }
svg .point-label { font-size: 11px; fill: var(--ink); }
svg .row-label { font-size: 12px; fill: var(--ink); }
svg .ref-label { font-size: 11px; fill: var(--green); }
svg .grid line { stroke: #e6e8eb; stroke-width: 1; }
svg .axis line { stroke: #6b7178; stroke-width: 1; }
svg .pt { stroke: var(--ink); stroke-width: .8; }
svg .route-line, svg .subset-line { fill: none; stroke: var(--blue); stroke-width: 2; }
svg .route-point.add { fill: var(--blue); }
svg .route-point.remove { fill: var(--vermillion); }
svg .route-point.start, svg .route-point.stop { fill: #fff; stroke-width: 1.6; }
svg .candidate.eligible { fill: var(--sky); }
svg .candidate.chosen { fill: var(--vermillion); stroke-width: 1.4; }
svg .candidate.ineligible { fill: #fff; stroke: #8a9098; stroke-dasharray: 2 1.5; }
svg .candidate.no-score { fill: none; stroke: #8a9098; }
svg .subset-best { fill: var(--blue); }
svg .subset-best.chosen { fill: var(--vermillion); }
svg .row-track { stroke: #d9dce0; stroke-width: 6; stroke-linecap: round; }
svg .zero { stroke: var(--ink); stroke-width: 1.5; }
svg .ci { stroke: var(--blue); stroke-width: 4; stroke-linecap: round; }
svg .coef { fill: var(--orange); }
svg .cooks-bin, svg .qq-point { fill: var(--sky); stroke: #1f4e6e; stroke-width: .4; }
svg .cooks-flagged, svg .resid-flagged { fill: var(--vermillion); stroke-width: .9; }
svg .density-cell { fill: var(--blue); stroke: none; }
svg .hist-bar { fill: var(--sky); stroke: #1f4e6e; stroke-width: .6; }
svg .bar { fill: var(--sky); stroke: #1f4e6e; stroke-width: .6; }
svg .bar.chosen { fill: var(--vermillion); }
svg .calibration-point { fill: var(--blue); }
svg .normal-curve { fill: none; stroke: var(--vermillion); stroke-width: 2; }
svg .ref { stroke: var(--green); stroke-width: 1.5; stroke-dasharray: 6 3; fill: none; }
@media (max-width: 40rem) {
  body { font-size: 15px; }
  main { padding: .5rem .6rem 2rem; }
  dl.facts { grid-template-columns: 1fr; }
  dl.facts dd { margin-bottom: .4rem; }
}
@media print {
  body { background: #fff; font-size: 10.5pt; }
  main { max-width: none; padding: 0; }
  nav { display: none; }
  h2 { break-after: avoid; page-break-after: avoid; }
  figure, .cautions, tr { break-inside: avoid; page-break-inside: avoid; }
  .table-wrap { overflow: visible; }
  a { color: inherit; text-decoration: none; }
}
)css";
std::string E(std::string_view text) { return HtmlEscape(text); }

// An SVG coordinate (not a number for people: no separators).
std::string C(double value) { return SvgNumber(value); }

std::string Cell(const ReportValue& value, ValueKind kind) {
  return std::string(kind == ValueKind::kText ? "<td>" : "<td class=\"num\">") + E(value.text) + "</td>";
}

// An integer axis for step numbers and model sizes: half a unit of room at each end, ticks at
// whole numbers (thinned to about a dozen).
AxisScale IntegerScale(double first, double last) {
  AxisScale scale;
  scale.lo = first - 0.5;
  scale.hi = last + 0.5;
  const double span = std::max(1.0, last - first);
  scale.step = std::max(1.0, std::ceil(span / 12.0));
  for (double tick = first; tick <= last + 1e-9; tick += scale.step) scale.ticks.push_back(tick);
  return scale;
}

AxisScale ScaleOf(const std::vector<double>& values, int ticks = 5) {
  if (values.empty()) return NiceScale(0, 1, ticks);
  const auto [low, high] = std::minmax_element(values.begin(), values.end());
  return NiceScale(*low, *high, ticks);
}

MarkerShape ShapeFor(const ChartPoint& point) {
  if (!point.defined) return MarkerShape::kCross;
  const std::string& css = point.css_class;
  auto has = [&](const char* word) {
    const std::string padded = " " + css + " ";
    return padded.find(std::string(" ") + word + " ") != std::string::npos;
  };
  if (has("add") || has("cooks-flagged") || has("resid-flagged")) return MarkerShape::kTriangleUp;
  if (has("remove")) return MarkerShape::kTriangleDown;
  if (has("stop") || has("chosen") || has("coef")) return MarkerShape::kDiamond;
  if (has("start")) return MarkerShape::kSquare;
  return MarkerShape::kCircle;
}

double RadiusFor(const ChartPoint& point) {
  const std::string& css = point.css_class;
  if (css.find("chosen") != std::string::npos) return 6.5;
  if (css.find("flagged") != std::string::npos) return 4;
  if (css.find("cooks-bin") != std::string::npos) return 3;
  return 5.5;
}

std::string PointMarker(const ChartPoint& point, double x, double y) {
  return Marker(ShapeFor(point), x, y, RadiusFor(point), "pt " + point.css_class,
                point.title ? std::string_view(*point.title) : std::string_view());
}

void References(std::ostringstream& out, const XyPlot& plot, const ReportChart& chart) {
  for (const ReferenceLine& line : chart.references) {
    out << (line.vertical ? plot.VerticalLine(line.value, "ref", line.label)
                          : plot.HorizontalLine(line.value, "ref", line.label));
  }
}

// Line and scatter charts: x–y points, joined or not, undefined ones as crosses on the axis.
void XyChart(std::ostringstream& out, const ReportChart& chart, double chart_width) {
  std::vector<double> xs = chart.x_include, ys = chart.y_include;
  for (const ChartSeries& series : chart.series) {
    for (const ChartPoint& point : series.points) {
      xs.push_back(point.x);
      if (point.defined) ys.push_back(point.y);
    }
  }
  XyPlot::Layout layout;
  layout.width = chart_width;
  if (chart.rotate_point_labels) layout.top = 70;  // room for the rotated point labels
  AxisScale x_scale = ScaleOf(xs);
  if (chart.integer_x && !xs.empty()) {
    const auto [low, high] = std::minmax_element(xs.begin(), xs.end());
    x_scale = IntegerScale(*low, *high);
  }
  const XyPlot plot(layout, x_scale, ScaleOf(ys));
  out << plot.Begin(chart.id, chart.title, chart.x_label, chart.y_label);
  References(out, plot, chart);
  for (const ChartSeries& series : chart.series) {
    std::vector<std::pair<double, double>> line;
    std::ostringstream points;
    for (const ChartPoint& point : series.points) {
      const double x = plot.X(point.x);
      const double y = point.defined ? plot.Y(point.y) : plot.Y(plot.y_scale().lo);
      if (point.defined) line.emplace_back(x, y);
      if (series.markers) points << PointMarker(point, x, y);
      if (chart.rotate_point_labels && !point.label.empty()) {
        points << "<text class=\"point-label\" transform=\"translate(" << C(x + 3) << " " << C(y - 10)
               << ") rotate(-35)\">" << E(point.label) << "</text>";
      }
      if (series.markers) points << "\n";
    }
    if (series.joined && line.size() >= 2) {
      const std::string line_class =
          !series.line_class.empty() ? series.line_class : series.markers ? "route-line" : "normal-curve";
      out << "<polyline class=\"" << line_class << "\" points=\""
          << PointList(line) << "\"/>\n";
    }
    out << points.str();
  }
  out << XyPlot::End();
}

// One labelled row per point, the value on the x axis (the candidates of a step); with kBars a
// bar from 0 to the value (shares of bootstrap replicates).
void DotRowsChart(std::ostringstream& out, const ReportChart& chart, double chart_width) {
  const std::vector<ChartPoint>& points = chart.series.front().points;
  std::vector<double> values = chart.x_include;
  std::size_t longest_label = 4;
  for (const ChartPoint& point : points) {
    if (point.defined) values.push_back(point.x);
    longest_label = std::max(longest_label, point.label.size());
  }
  XyPlot::Layout layout;
  layout.width = chart_width;
  layout.left = std::clamp(static_cast<double>(longest_label) * 7.2 + 18, 90.0, 280.0);
  layout.right = 70;
  const double row_height = 22;
  layout.height = layout.top + layout.bottom + row_height * static_cast<double>(points.size());
  AxisScale rows;  // the row number from the top; rows are labelled instead of ticked
  rows.lo = 0;
  rows.hi = static_cast<double>(points.size());
  rows.step = 1;
  const XyPlot plot(layout, ScaleOf(values), rows);
  out << plot.Begin(chart.id, chart.title, chart.x_label, "");
  References(out, plot, chart);
  for (std::size_t index = 0; index < points.size(); ++index) {
    const ChartPoint& point = points[index];
    const double y = plot.Y(rows.hi - static_cast<double>(index) - 0.5);
    const double x = point.defined ? plot.X(point.x) : plot.X(plot.x_scale().lo);
    out << "<text class=\"row-label\" x=\"" << C(layout.left - 8) << "\" y=\"" << C(y + 4)
        << "\" text-anchor=\"end\">" << E(point.label) << "</text>";
    if (chart.kind == ChartKind::kBars) {
      const double zero = plot.X(0);
      out << "<rect class=\"pt bar " << E(point.css_class) << "\" x=\"" << C(std::min(zero, x)) << "\" y=\""
          << C(y - row_height * 0.35) << "\" width=\"" << C(std::fabs(x - zero)) << "\" height=\""
          << C(row_height * 0.7) << "\"><title>" << E(point.title.value_or(point.label)) << "</title></rect>"
          << "<text class=\"point-label\" x=\"" << C(std::max(zero, x) + 5) << "\" y=\"" << C(y + 4) << "\">"
          << E(point.value_text) << "</text>\n";
      continue;
    }
    out << PointMarker(point, x, y);
    if (point.css_class.find("chosen") != std::string::npos) {
      out << "<text class=\"point-label\" x=\"" << C(x + 11) << "\" y=\"" << C(y + 4) << "\">chosen</text>";
    }
    out << "\n";
  }
  out << XyPlot::End();
}

// Coefficients one row each, every row on its own scale (estimates differ by orders of
// magnitude: one shared axis would flatten most intervals), with zero marked on each row.
void IntervalsChart(std::ostringstream& out, const ReportChart& chart, double chart_width) {
  const std::vector<ChartPoint>& rows = chart.series.front().points;
  std::size_t longest_label = 6;
  for (const ChartPoint& point : rows) longest_label = std::max(longest_label, point.label.size());
  const double width = chart_width;
  const double left = std::clamp(static_cast<double>(longest_label) * 7.2 + 18, 90.0, 260.0);
  const double right = 190;  // the numbers
  const double top = 44, row_height = 26;
  const double height = top + 16 + row_height * static_cast<double>(rows.size());
  out << "<svg class=\"chart " << E(chart.id) << "\" viewBox=\"0 0 " << C(width) << " " << C(height)
      << "\" width=\"100%\" role=\"img\" aria-label=\"" << E(chart.title) << "\"><title>" << E(chart.title)
      << "</title>\n<text class=\"chart-title\" x=\"" << C(left) << "\" y=\"22\">" << E(chart.title) << "</text>\n";
  const double x0 = left, x1 = width - right;
  for (std::size_t index = 0; index < rows.size(); ++index) {
    const ChartPoint& point = rows[index];
    const double estimate = point.x, low = point.low.value_or(point.x), high = point.high.value_or(point.x);
    double lo = std::min({low, 0.0, estimate}), hi = std::max({high, 0.0, estimate});
    const double pad = (hi - lo) * 0.06 + (hi == lo ? 1 : 0);
    lo -= pad;
    hi += pad;
    auto X = [&](double value) { return x0 + (value - lo) / (hi - lo) * (x1 - x0); };
    const double y = top + row_height * (static_cast<double>(index) + 0.5);
    out << "<text class=\"row-label\" x=\"" << C(left - 8) << "\" y=\"" << C(y + 4) << "\" text-anchor=\"end\">"
        << E(point.label) << "</text>"
        << "<line class=\"row-track\" x1=\"" << C(x0) << "\" y1=\"" << C(y) << "\" x2=\"" << C(x1) << "\" y2=\""
        << C(y) << "\"/>"
        << "<line class=\"zero\" x1=\"" << C(X(0)) << "\" y1=\"" << C(y - 9) << "\" x2=\"" << C(X(0))
        << "\" y2=\"" << C(y + 9) << "\"/>"
        << "<line class=\"ci\" x1=\"" << C(X(low)) << "\" y1=\"" << C(y) << "\" x2=\"" << C(X(high)) << "\" y2=\""
        << C(y) << "\"/>" << Marker(MarkerShape::kDiamond, X(estimate), y, 5, "pt " + point.css_class,
                                    point.title ? *point.title : std::string())
        << "<text class=\"point-label\" x=\"" << C(x1 + 10) << "\" y=\"" << C(y + 4) << "\">" << E(point.value_text)
        << "</text>\n";
  }
  out << "</svg>";
}

// A grid of binned counts, each non-empty cell shaded by its share of the fullest cell (a
// square-root scale, so that sparse cells stay visible), then the points on top.
void DensityChart(std::ostringstream& out, const ReportChart& chart, double chart_width) {
  const ChartGrid& grid = *chart.grid;
  std::vector<double> xs = chart.x_include, ys = chart.y_include;
  for (const ChartPoint& point : chart.series.front().points) {
    xs.push_back(point.x);
    ys.push_back(point.y);
  }
  XyPlot::Layout layout;
  layout.width = chart_width;
  const XyPlot plot(layout, ScaleOf(xs), ScaleOf(ys));
  out << plot.Begin(chart.id, chart.title, chart.x_label, chart.y_label);
  const std::uint64_t most = grid.counts.empty() ? 0 : *std::max_element(grid.counts.begin(), grid.counts.end());
  const double cell_width = (grid.x_hi - grid.x_lo) / static_cast<double>(grid.columns);
  const double cell_height = (grid.y_hi - grid.y_lo) / static_cast<double>(grid.rows);
  for (std::size_t row = 0; row < grid.rows; ++row) {
    bool any = false;
    for (std::size_t column = 0; column < grid.columns; ++column) {
      const std::uint64_t count = grid.CountAt(column, row);
      if (count == 0) continue;
      any = true;
      const double x = grid.x_lo + cell_width * static_cast<double>(column);
      const double y = grid.y_lo + cell_height * static_cast<double>(row);
      const double left = plot.X(x), right = plot.X(x + cell_width);
      const double bottom = plot.Y(y), top = plot.Y(y + cell_height);
      const double shade = 0.12 + 0.88 * std::sqrt(static_cast<double>(count) / static_cast<double>(most));
      out << "<rect class=\"pt density-cell\" x=\"" << C(left) << "\" y=\"" << C(top) << "\" width=\""
          << C(right - left) << "\" height=\"" << C(bottom - top) << "\" fill-opacity=\"" << SvgNumber(shade)
          << "\"><title>" << E(FormatCount(static_cast<std::int64_t>(count)) + (count == 1 ? " row" : " rows")) << "</title></rect>";
    }
    if (any) out << "\n";
  }
  References(out, plot, chart);
  for (const ChartPoint& point : chart.series.front().points) {
    out << PointMarker(point, plot.X(point.x), plot.Y(point.y)) << "\n";
  }
  out << XyPlot::End();
}

// Bars of binned counts with a curve on top.
void HistogramChart(std::ostringstream& out, const ReportChart& chart, double chart_width) {
  const ChartGrid& grid = *chart.grid;
  XyPlot::Layout layout;
  layout.width = chart_width;
  const XyPlot plot(layout, ScaleOf(chart.x_include), ScaleOf(chart.y_include));
  out << plot.Begin(chart.id, chart.title, chart.x_label, chart.y_label);
  const double bin_width = (grid.x_hi - grid.x_lo) / static_cast<double>(grid.columns);
  for (std::size_t column = 0; column < grid.columns; ++column) {
    const std::uint64_t count = grid.CountAt(column, 0);
    if (count == 0) continue;
    const double lo = grid.x_lo + bin_width * static_cast<double>(column);
    const double left = plot.X(lo), right = plot.X(lo + bin_width);
    const double top = plot.Y(static_cast<double>(count)), bottom = plot.Y(0);
    out << "<rect class=\"pt hist-bar\" x=\"" << C(left) << "\" y=\"" << C(top) << "\" width=\"" << C(right - left)
        << "\" height=\"" << C(bottom - top) << "\"><title>"
        << E(FormatQuantity(lo) + " to " + FormatQuantity(lo + bin_width) + ": " +
             FormatCount(static_cast<std::int64_t>(count)) + (count == 1 ? " row" : " rows"))
        << "</title></rect>\n";
  }
  for (const ChartSeries& series : chart.series) {
    std::vector<std::pair<double, double>> line;
    for (const ChartPoint& point : series.points) line.emplace_back(plot.X(point.x), plot.Y(point.y));
    out << "<polyline class=\"normal-curve\" points=\"" << PointList(line) << "\"/>\n";
  }
  out << XyPlot::End();
}

struct HtmlBlock {
  std::ostringstream& out;
  double chart_width;

  void operator()(const ReportParagraph& paragraph) const {
    out << "<p" << (paragraph.style.empty() ? "" : " class=\"" + E(paragraph.style) + "\"") << ">" << E(paragraph.text)
        << "</p>\n";
  }
  void operator()(const ReportList& list) const {
    out << "<ul>\n";
    for (const ReportList::Item& item : list.items) {
      out << "<li>";
      if (!item.tag.empty()) out << "<span class=\"kind\">" << E(item.tag) << "</span>";
      out << E(item.text) << "</li>\n";
    }
    out << "</ul>\n";
  }
  void operator()(const ReportFacts& facts) const {
    out << "<dl class=\"facts\">\n";
    for (const ReportFact& fact : facts.facts) {
      out << "<dt>" << E(fact.label) << "</dt><dd>" << E(fact.value.text) << "</dd>\n";
    }
    out << "</dl>\n";
  }
  void operator()(const ReportTable& table) const {
    if (table.folded) out << "<details><summary>" << E(table.caption) << ": the table</summary>";
    out << "<div class=\"table-wrap\"><table>";
    if (!table.caption.empty() && !table.folded) out << "<caption class=\"note\">" << E(table.caption) << "</caption>";
    out << "<thead><tr>";
    for (const ReportColumn& column : table.columns) out << "<th>" << E(column.heading) << "</th>";
    out << "</tr></thead><tbody>\n";
    for (std::size_t index = 0; index < table.rows.size(); ++index) {
      const std::string style = index < table.row_styles.size() ? table.row_styles[index] : "";
      out << (style.empty() ? "<tr>" : "<tr class=\"" + E(style) + "\">");
      const auto& row = table.rows[index];
      for (std::size_t column = 0; column < row.size(); ++column) {
        out << Cell(row[column], column < table.columns.size() ? table.columns[column].kind : ValueKind::kText);
      }
      out << "</tr>\n";
    }
    out << "</tbody></table></div>\n";
    if (table.folded) out << "</details>\n";
    if (table.rows_not_listed > 0) {
      out << "<p class=\"note\">… and " << E(FormatCount(static_cast<std::int64_t>(table.rows_not_listed)))
          << " more.</p>\n";
    }
  }
  void operator()(const ReportChart& chart) const {
    out << "<figure>";
    switch (chart.kind) {
      case ChartKind::kLine:
      case ChartKind::kScatter: XyChart(out, chart, chart_width); break;
      case ChartKind::kDotRows:
      case ChartKind::kBars: DotRowsChart(out, chart, chart_width); break;
      case ChartKind::kIntervals: IntervalsChart(out, chart, chart_width); break;
      case ChartKind::kDensity: DensityChart(out, chart, chart_width); break;
      case ChartKind::kHistogram: HistogramChart(out, chart, chart_width); break;
    }
    out << "<figcaption>" << E(chart.caption) << "</figcaption></figure>\n";
  }
};

}  // namespace

std::string RenderHtmlReport(const ReportModel& model, double chart_width) {
  std::ostringstream out;
  out << "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      << "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
      << "<meta name=\"generator\" content=\"stepledger report\">\n<title>" << E(model.title) << "</title>\n<style>"
      << kStyle << "</style>\n</head>\n<body>\n<main>\n";
  // The warning comes before anything else: a reader must not take the numbers at face value.
  if (!model.integrity_warning.empty()) {
    out << "<section id=\"unverified\" class=\"unverified\" role=\"alert\">";
    for (const std::string& line : model.integrity_warning) out << "<p>" << E(line) << "</p>";
    out << "</section>\n";
  }
  out << "<header><h1>" << E(model.title) << "</h1>\n<p class=\"meta\">" << E(model.subtitle) << "</p></header>\n";
  out << "<nav><ol>";
  for (const ReportSection& section : model.sections) {
    out << "<li><a href=\"#" << E(section.id) << "\">" << E(section.title) << "</a></li>";
  }
  out << "</ol></nav>\n";
  for (const ReportSection& section : model.sections) {
    out << "<section id=\"" << E(section.id) << "\"" << (section.id == "cautions" ? " class=\"cautions\"" : "")
        << "><h2>" << E(section.title) << "</h2>\n";
    for (const ReportBlock& block : section.blocks) std::visit(HtmlBlock{out, chart_width}, block);
    out << "</section>\n";
  }
  out << "<footer class=\"note\"><p>Rendered from the audit file alone"
      << (model.has_diagnostics ? " and one pass over its data for the diagnostics" : "")
      << ". This file needs nothing else to be read or printed.</p></footer>\n</main>\n</body>\n</html>\n";
  return out.str();
}

}  // namespace stepledger

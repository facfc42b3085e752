// The report as one self-contained HTML5 file: inline <style>, inline SVG, no scripts and no
// reference to anything outside the file. Every text from the audit goes through HtmlEscape.

#include <algorithm>
#include <cmath>
#include <set>
#include <sstream>

#include "report_internal.h"
#include "stepledger/report/report.h"
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
svg .resid, svg .qq, svg .lev { fill: var(--sky); stroke: #1f4e6e; stroke-width: .4; fill-opacity: .7; }
svg .flagged { fill: var(--vermillion); fill-opacity: 1; stroke-width: .9; }
svg .ref { stroke: var(--green); stroke-width: 1.5; stroke-dasharray: 6 3; fill: none; }
svg .contour { stroke: var(--purple); stroke-width: 1.8; fill: none; }
svg .contour.one { stroke-dasharray: 8 3 2 3; }
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

std::string Cell(const std::string& text, bool number = false) {
  return std::string(number ? "<td class=\"num\">" : "<td>") + E(text) + "</td>";
}

std::string TableStart(const std::vector<std::string>& headers, std::string_view caption = {}) {
  std::string html = "<div class=\"table-wrap\"><table>";
  if (!caption.empty()) html += "<caption class=\"note\">" + E(caption) + "</caption>";
  html += "<thead><tr>";
  for (const std::string& header : headers) html += "<th>" + E(header) + "</th>";
  return html + "</tr></thead><tbody>\n";
}

constexpr const char* kTableEnd = "</tbody></table></div>\n";

std::string JoinTerms(const json& terms) {
  std::string text;
  for (const json& term : terms) text += (text.empty() ? "" : ", ") + Text(term);
  return text.empty() ? "(intercept only)" : text;
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

// ---- sections ----------------------------------------------------------------------------

void Summary(std::ostringstream& out, const json& audit) {
  const json& model = Get(audit, "model");
  const json& search = Get(audit, "search");
  out << "<section id=\"summary\"><h2>Summary</h2><dl class=\"facts\">\n";
  out << "<dt>Final model</dt><dd>" << E(ResponseLabel(audit)) << " ~ " << E(JoinTerms(Get(model, "terms")))
      << "</dd>\n";
  out << "<dt>Rows used</dt><dd>" << E(FormatCount(Get(model, "n"))) << " (k = " << E(Text(Get(model, "k")))
      << " coefficients)</dd>\n";
  out << "<dt>Fit</dt><dd>R² " << E(Format(Number(Get(model, "r2")))) << ", adjusted R² "
      << E(Format(Number(Get(model, "adj_r2")))) << ", residual SD " << E(Format(Number(Get(model, "sigma"))))
      << " (" << E(ResponseLabel(audit)) << ")</dd>\n";
  out << "<dt>" << E(CriterionValueName(Text(Get(search, "criterion")))) << "</dt><dd>"
      << E(Format(Number(Get(search, "final_criterion_value")), 6)) << "</dd>\n";
  out << "<dt>Outcome</dt><dd>" << E(Text(Get(search, "outcome"))) << ": " << E(Text(Get(search, "stop_rule")))
      << "</dd>\n</dl></section>\n";
}

void Cautions(std::ostringstream& out, const json& audit) {
  out << "<section id=\"cautions\" class=\"cautions\"><h2>Cautions for this run</h2><ul>\n";
  const json& cautions = Get(audit, "cautions");
  if (cautions.empty()) out << "<li>No caution was recorded in this audit.</li>\n";
  for (const json& caution : cautions) {
    if (caution.is_object()) {
      out << "<li><span class=\"kind\">" << E(Text(Get(caution, "kind"))) << "</span>"
          << E(Text(Get(caution, "message"))) << "</li>\n";
    } else {
      out << "<li>" << E(Text(caution)) << "</li>\n";
    }
  }
  out << "</ul></section>\n";
}

void Plan(std::ostringstream& out, const json& audit) {
  out << "<section id=\"plan\"><h2>The plan</h2><ul>\n";
  for (const std::string& sentence : PlanSentences(audit)) out << "<li>" << E(sentence) << "</li>\n";
  out << "</ul>\n";
  const auto definitions = TermDefinitions(audit);
  if (!definitions.empty()) {
    out << "<h3>Candidate terms</h3>" << TableStart({"term", "definition"});
    for (const auto& [name, definition] : definitions) {
      out << "<tr>" << Cell(name) << Cell(definition) << "</tr>\n";
    }
    out << kTableEnd;
  }
  for (const json& skipped : Get(Get(audit, "design"), "skipped")) {
    out << "<p>Skipped term <code>" << E(Text(Get(skipped, "term"))) << "</code>: "
        << E(Text(Get(skipped, "reason"))) << "</p>\n";
  }
  out << "</section>\n";
}

void Data(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  const json& data = Get(audit, "data");
  out << "<section id=\"data\"><h2>Data and row accounting</h2><dl class=\"facts\">\n";
  out << "<dt>File</dt><dd>" << E(Text(Get(data, "file"))) << " (" << E(FormatCount(Get(data, "bytes")))
      << " bytes)</dd>\n";
  out << "<dt>SHA-256</dt><dd class=\"digest\">" << E(Text(Get(data, "sha256"))) << "</dd>\n";
  out << "<dt>Rows read</dt><dd>" << E(FormatCount(Get(data, "rows_read"))) << "</dd>\n";
  out << "<dt>Rows used</dt><dd>" << E(FormatCount(Get(data, "rows_used"))) << "</dd>\n</dl>\n";
  const json& dropped = Get(data, "rows_dropped");
  if (dropped.empty()) {
    out << "<p>No rows dropped.</p>\n";
  } else {
    out << TableStart({"rows dropped because", "rows"});
    for (const auto& [reason, count] : dropped.items()) {
      out << "<tr>" << Cell(reason) << Cell(FormatCount(count), true) << "</tr>\n";
    }
    out << kTableEnd;
  }
  const json& columns = Get(data, "columns");
  if (!columns.empty()) {
    out << "<h3>Columns</h3>"
        << TableStart({"column", "type", "present", "missing", "min", "max", "mean", "SD", "levels"});
    for (const json& column : columns) {
      const std::string levels = LevelsSummary(column, options.max_levels_listed, /*with_counts=*/true);
      out << "<tr>" << Cell(Text(Get(column, "name"))) << Cell(Text(Get(column, "type")))
          << Cell(FormatCount(Get(column, "present")), true) << Cell(FormatCount(Get(column, "missing")), true)
          << Cell(Format(Number(Get(column, "min"))), true) << Cell(Format(Number(Get(column, "max"))), true)
          << Cell(Format(Number(Get(column, "mean"))), true) << Cell(Format(Number(Get(column, "sd"))), true)
          << Cell(levels) << "</tr>\n";
    }
    out << kTableEnd;
  }
  out << "</section>\n";
}

MarkerShape StepShape(const std::string& action) {
  if (action == "add") return MarkerShape::kTriangleUp;
  if (action == "remove") return MarkerShape::kTriangleDown;
  if (action == "stop") return MarkerShape::kDiamond;
  return MarkerShape::kSquare;
}

void RouteChart(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  const json& steps = audit["steps"];
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  std::vector<double> values;
  for (const json& step : steps) {
    if (const auto value = Number(Get(step, "criterion_value"))) values.push_back(*value);
  }
  if (steps.empty()) return;
  XyPlot::Layout layout;
  layout.width = options.chart_width;
  layout.top = 70;  // room for the rotated point labels
  const XyPlot plot(layout, IntegerScale(0, static_cast<double>(steps.size() - 1)), ScaleOf(values));
  const std::string value_name = CriterionValueName(criterion);
  out << "<figure>" << plot.Begin("route-chart", value_name + " by step", "step", value_name);
  std::vector<std::pair<double, double>> line;
  std::ostringstream points;
  for (std::size_t index = 0; index < steps.size(); ++index) {
    const json& step = steps[index];
    const auto value = Number(Get(step, "criterion_value"));
    const std::string action = Text(Get(step, "action"));
    const double x = plot.X(static_cast<double>(index));
    // A step without a value (undefined criterion) sits on the axis, drawn as a cross.
    const double y = value ? plot.Y(*value) : plot.Y(plot.y_scale().lo);
    if (value) line.emplace_back(x, y);
    points << Marker(value ? StepShape(action) : MarkerShape::kCross, x, y, 5.5,
                     "pt route-point " + action,
                     "step " + Text(Get(step, "index")) + ": " + StepLabel(step) + ", " + value_name + " " +
                         Format(value, 6));
    points << "<text class=\"point-label\" transform=\"translate(" << Format(x + 3, 6) << " "
           << Format(y - 10, 6) << ") rotate(-35)\">" << E(StepLabel(step)) << "</text>\n";
  }
  out << "<polyline class=\"route-line\" points=\"" << PointList(line) << "\"/>\n" << points.str();
  out << XyPlot::End() << "<figcaption>" << E(value_name) << " of the model after each step ("
      << (HigherIsBetter(criterion) ? "higher" : "lower")
      << " is better). Markers: ▲ term added, ▼ term removed, ■ start, ◆ stop.</figcaption></figure>\n";
}

void Route(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const std::string value_name = CriterionValueName(criterion);
  out << "<section id=\"route\"><h2>The route</h2>\n";
  out << TableStart({"step", "action", "term", value_name + " before", value_name + " after", "rule"});
  for (const json& step : audit["steps"]) {
    out << "<tr>" << Cell(Text(Get(step, "index")), true) << Cell(Text(Get(step, "action")))
        << Cell(Text(Get(step, "term"))) << Cell(Format(Number(Get(step, "criterion_before")), 6), true)
        << Cell(Format(Number(Get(step, "criterion_value")), 6), true) << Cell(Text(Get(step, "rule")))
        << "</tr>\n";
  }
  out << kTableEnd;
  RouteChart(out, audit, options);
  out << "</section>\n";
}

// One dot chart per step: a row per candidate, its score on the x axis.
void CandidateChart(std::ostringstream& out, const json& audit, const json& step,
                    const ReportOptions& options) {
  const json& candidates = step["candidates"];
  const json& plan = Get(Get(audit, "plan"), "normalised");
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const bool p_rule = criterion == "partial-f";
  const std::string value_key = p_rule ? "p" : "score";
  const std::string value_name = p_rule ? "p-value of the partial F test" : CriterionValueName(criterion);

  std::vector<double> values;
  std::size_t longest_label = 4;
  for (const json& candidate : candidates) {
    if (const auto value = Number(Get(candidate, value_key))) values.push_back(*value);
    longest_label = std::max(longest_label, Text(Get(candidate, "term")).size() + 2);
  }
  std::optional<double> reference;
  std::string reference_label;
  if (p_rule) {
    const std::string action = Text(Get(step, "action"));
    const bool removing = action == "remove" || (!candidates.empty() && Text(Get(candidates[0], "action")) == "remove");
    reference = Number(Get(plan, removing ? "exit_p" : "entry_p"));
    reference_label = removing ? "exit_p" : "entry_p";
    values.push_back(0);
  } else {
    reference = Number(Get(step, "criterion_before"));
    if (!reference) reference = Number(Get(step, "criterion_value"));
    reference_label = "current model";
  }
  if (reference) values.push_back(*reference);

  XyPlot::Layout layout;
  layout.width = options.chart_width;
  layout.left = std::clamp(static_cast<double>(longest_label) * 7.2 + 18, 90.0, 280.0);
  layout.right = 70;
  const double row_height = 22;
  layout.height = layout.top + layout.bottom + row_height * static_cast<double>(candidates.size());
  // The y axis is the row number (rows from the top); ticks are drawn as row labels instead.
  AxisScale rows;
  rows.lo = 0;
  rows.hi = static_cast<double>(candidates.size());
  rows.step = 1;
  const XyPlot plot(layout, ScaleOf(values), rows);
  const std::string title = "Step " + Text(Get(step, "index")) + " (" + StepLabel(step) + "): " +
                            std::to_string(candidates.size()) + " candidates";
  out << "<figure>" << plot.Begin("candidate-chart", title, value_name, "");
  if (reference) out << plot.VerticalLine(*reference, "ref", reference_label);
  for (std::size_t index = 0; index < candidates.size(); ++index) {
    const json& candidate = candidates[index];
    const double y = plot.Y(rows.hi - static_cast<double>(index) - 0.5);
    const std::string term = Text(Get(candidate, "term"));
    const std::string move = Text(Get(candidate, "action")) == "remove" ? "- " : "+ ";
    out << "<text class=\"row-label\" x=\"" << Format(layout.left - 8, 6) << "\" y=\"" << Format(y + 4, 6)
        << "\" text-anchor=\"end\">" << E(move + term) << "</text>";
    const bool chosen = term == Text(Get(step, "term")) && Text(Get(candidate, "action")) == Text(Get(step, "action"));
    const bool eligible = Get(candidate, "eligible") != false;
    const auto value = Number(Get(candidate, value_key));
    std::string detail = move + term + ": " + value_name + " " + Format(value, 6) + ", F " +
                         Format(Number(Get(candidate, "f"))) + ", p " + FormatP(Number(Get(candidate, "p")));
    if (!value) {
      out << Marker(MarkerShape::kCross, plot.X(plot.x_scale().lo), y, 5, "pt candidate no-score",
                    "no score: " + Text(Get(candidate, "reason")));
    } else if (!eligible) {
      out << Marker(MarkerShape::kCircle, plot.X(*value), y, 5, "pt candidate ineligible",
                    "ineligible: " + Text(Get(candidate, "reason")) + " (" + detail + ")");
    } else if (chosen) {
      out << Marker(MarkerShape::kDiamond, plot.X(*value), y, 6.5, "pt candidate chosen", "chosen: " + detail);
      out << "<text class=\"point-label\" x=\"" << Format(plot.X(*value) + 11, 6) << "\" y=\""
          << Format(y + 4, 6) << "\">chosen</text>";
    } else {
      out << Marker(MarkerShape::kCircle, plot.X(*value), y, 5, "pt candidate eligible", detail);
    }
    out << "\n";
  }
  out << XyPlot::End() << "<figcaption>◆ the move taken, ● other eligible moves, ○ dashed: not eligible "
      << "(hover for the reason), × no score. "
      << (p_rule ? "The dashed line is the plan's p threshold."
                 : "The dashed line is the model before the step; " +
                       std::string(HigherIsBetter(criterion) ? "right" : "left") + " of it is better.")
      << "</figcaption></figure>\n";
}

void Candidates(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  out << "<section id=\"candidates\"><h2>Candidates at each step</h2>\n";
  bool any = false;
  for (const json& step : audit["steps"]) {
    if (Get(step, "candidates").empty()) continue;
    any = true;
    CandidateChart(out, audit, step, options);
  }
  if (!any) out << "<p>No step of this route scored candidates one by one.</p>\n";
  out << "</section>\n";
}

void Subsets(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  if (!audit.contains("subsets")) return;
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const std::string value_name = CriterionValueName(criterion);
  const std::vector<SubsetBest> best = BestSubsetBySize(audit);
  const std::size_t final_size = Get(Get(audit, "model"), "terms").size();
  out << "<section id=\"subsets\"><h2>All subsets: best " << E(value_name) << " by model size</h2>\n";
  if (!best.empty()) {
    std::vector<double> values;
    for (const SubsetBest& entry : best) values.push_back(entry.score);
    XyPlot::Layout layout;
    layout.width = options.chart_width;
    const XyPlot plot(layout,
                      IntegerScale(static_cast<double>(best.front().size), static_cast<double>(best.back().size)),
                      ScaleOf(values));
    out << "<figure>" << plot.Begin("subset-chart", "Best " + value_name + " by number of terms",
                                    "terms in the model (intercept not counted)", value_name);
    std::vector<std::pair<double, double>> line;
    for (const SubsetBest& entry : best) line.emplace_back(plot.X(static_cast<double>(entry.size)), plot.Y(entry.score));
    out << "<polyline class=\"subset-line\" points=\"" << PointList(line) << "\"/>\n";
    for (const SubsetBest& entry : best) {
      std::string terms;
      for (const std::string& term : entry.terms) terms += (terms.empty() ? "" : ", ") + term;
      const bool chosen = static_cast<std::size_t>(entry.size) == final_size;
      out << Marker(chosen ? MarkerShape::kDiamond : MarkerShape::kCircle,
                    plot.X(static_cast<double>(entry.size)), plot.Y(entry.score), chosen ? 7 : 5,
                    chosen ? "pt subset-best chosen" : "pt subset-best",
                    std::to_string(entry.size) + " terms: " + (terms.empty() ? "(intercept only)" : terms) +
                        "; " + value_name + " " + Format(entry.score, 6))
          << "\n";
    }
    out << XyPlot::End() << "<figcaption>The best kept model of each size; ◆ marks the size of the "
        << "final model. Hover a point for its terms.</figcaption></figure>\n";
  }
  out << TableStart({"size", "rank", "RSS", value_name, "terms"});
  for (const json& subset : audit["subsets"]) {
    out << "<tr>" << Cell(Text(Get(subset, "size")), true) << Cell(Text(Get(subset, "rank")), true)
        << Cell(Format(Number(Get(subset, "rss")), 6), true) << Cell(Format(Number(Get(subset, "score")), 6), true)
        << Cell(JoinTerms(Get(subset, "terms"))) << "</tr>\n";
  }
  out << kTableEnd << "</section>\n";
}

// Coefficients drawn one row each, every row on its own scale (estimates differ by orders of
// magnitude: one shared axis would flatten most intervals), with zero marked on each row.
void CoefficientChart(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  const json& model = Get(audit, "model");
  std::vector<const json*> rows;
  std::size_t longest_label = 6;
  for (const json& coefficient : Get(model, "coefficients")) {
    if (Number(Get(coefficient, "ci_low")) && Number(Get(coefficient, "ci_high")) &&
        Number(Get(coefficient, "estimate"))) {
      rows.push_back(&coefficient);
      longest_label = std::max(longest_label, Text(Get(coefficient, "name")).size());
    }
  }
  if (rows.empty()) {
    out << "<p class=\"note\">No coefficient has a confidence interval (no residual degrees of freedom).</p>\n";
    return;
  }
  const double width = options.chart_width;
  const double left = std::clamp(static_cast<double>(longest_label) * 7.2 + 18, 90.0, 260.0);
  const double right = 190;  // the numbers
  const double top = 44, row_height = 26;
  const double height = top + 16 + row_height * static_cast<double>(rows.size());
  const std::string level = Format(Number(Get(model, "confidence_level")).value_or(0.95) * 100, 3);
  const std::string title = "Coefficients with " + level + "% confidence intervals";
  out << "<figure><svg class=\"chart coef-chart\" viewBox=\"0 0 " << Format(width, 6) << " "
      << Format(height, 6) << "\" width=\"100%\" role=\"img\" aria-label=\"" << E(title) << "\"><title>"
      << E(title) << "</title>\n<text class=\"chart-title\" x=\"" << Format(left, 6) << "\" y=\"22\">"
      << E(title) << "</text>\n";
  const double x0 = left, x1 = width - right;
  for (std::size_t index = 0; index < rows.size(); ++index) {
    const json& coefficient = *rows[index];
    const double estimate = *Number(Get(coefficient, "estimate"));
    const double low = *Number(Get(coefficient, "ci_low"));
    const double high = *Number(Get(coefficient, "ci_high"));
    double lo = std::min({low, 0.0, estimate}), hi = std::max({high, 0.0, estimate});
    const double pad = (hi - lo) * 0.06 + (hi == lo ? 1 : 0);
    lo -= pad;
    hi += pad;
    auto X = [&](double value) { return x0 + (value - lo) / (hi - lo) * (x1 - x0); };
    const double y = top + row_height * (static_cast<double>(index) + 0.5);
    const std::string name = Text(Get(coefficient, "name"));
    out << "<text class=\"row-label\" x=\"" << Format(left - 8, 6) << "\" y=\"" << Format(y + 4, 6)
        << "\" text-anchor=\"end\">" << E(name) << "</text>"
        << "<line class=\"row-track\" x1=\"" << Format(x0, 6) << "\" y1=\"" << Format(y, 6) << "\" x2=\""
        << Format(x1, 6) << "\" y2=\"" << Format(y, 6) << "\"/>"
        << "<line class=\"zero\" x1=\"" << Format(X(0), 6) << "\" y1=\"" << Format(y - 9, 6) << "\" x2=\""
        << Format(X(0), 6) << "\" y2=\"" << Format(y + 9, 6) << "\"/>"
        << "<line class=\"ci\" x1=\"" << Format(X(low), 6) << "\" y1=\"" << Format(y, 6) << "\" x2=\""
        << Format(X(high), 6) << "\" y2=\"" << Format(y, 6) << "\"/>"
        << Marker(MarkerShape::kDiamond, X(estimate), y, 5, "pt coef",
                  name + ": " + Format(estimate, 6) + " [" + Format(low, 6) + ", " + Format(high, 6) + "]")
        << "<text class=\"point-label\" x=\"" << Format(x1 + 10, 6) << "\" y=\"" << Format(y + 4, 6) << "\">"
        << E(Format(estimate, 4) + " [" + Format(low, 3) + ", " + Format(high, 3) + "]") << "</text>\n";
  }
  out << "</svg><figcaption>◆ the estimate, bar the interval, dark tick zero. Each row has its own "
      << "scale so that every interval can be read; compare rows by the table, not by bar length. "
      << "An interval that crosses zero is compatible with no effect (and all these intervals "
      << "ignore the selection).</figcaption></figure>\n";
}

void FinalModel(std::ostringstream& out, const json& audit, const ReportOptions& options) {
  const json& model = Get(audit, "model");
  const std::string level = Format(Number(Get(model, "confidence_level")).value_or(0.95) * 100, 3);
  out << "<section id=\"model\"><h2>The final model</h2>\n<p>Response " << E(ResponseLabel(audit))
      << "; F " << E(Format(Number(Get(model, "f")))) << " (p " << E(FormatP(Number(Get(model, "f_p"))))
      << "), AIC " << E(Format(Number(Get(model, "aic")), 6)) << ", BIC " << E(Format(Number(Get(model, "bic")), 6))
      << ", RSS " << E(Format(Number(Get(model, "rss")), 6)) << ".</p>\n";
  out << TableStart({"coefficient", "term", "estimate", "SE", "t", "p", level + "% low", level + "% high", "VIF"});
  for (const json& coefficient : Get(model, "coefficients")) {
    out << "<tr>" << Cell(Text(Get(coefficient, "name"))) << Cell(Text(Get(coefficient, "term")))
        << Cell(Format(Number(Get(coefficient, "estimate")), 6), true) << Cell(Format(Number(Get(coefficient, "se"))), true)
        << Cell(Format(Number(Get(coefficient, "t"))), true) << Cell(FormatP(Number(Get(coefficient, "p"))), true)
        << Cell(Format(Number(Get(coefficient, "ci_low")), 6), true)
        << Cell(Format(Number(Get(coefficient, "ci_high")), 6), true)
        << Cell(Format(Number(Get(coefficient, "vif")), 3), true) << "</tr>\n";
  }
  out << kTableEnd;
  CoefficientChart(out, audit, options);
  const json& anova = Get(model, "anova");
  if (anova.is_object()) {
    out << "<h3>Analysis of variance</h3>"
        << TableStart({"source", "df", "SS", "MS", "F", "p"}, "Sequential sums of squares, in model order.");
    auto row = [&](const json& entry) {
      out << "<tr>" << Cell(Text(Get(entry, "source"))) << Cell(Format(Number(Get(entry, "df"))), true)
          << Cell(Format(Number(Get(entry, "ss")), 6), true) << Cell(Format(Number(Get(entry, "ms")), 6), true)
          << Cell(Format(Number(Get(entry, "f"))), true) << Cell(FormatP(Number(Get(entry, "p"))), true) << "</tr>\n";
    };
    for (const json& entry : Get(anova, "terms")) row(entry);
    for (const char* key : {"regression", "residual", "total"}) {
      if (Get(anova, key).is_object()) row(anova[key]);
    }
    out << kTableEnd;
  }
  out << "</section>\n";
}

void Diagnostics(std::ostringstream& out, const json& audit, const ReportDiagnostics* diagnostics,
                 const ReportOptions& options) {
  out << "<section id=\"diagnostics\"><h2>Diagnostics</h2>\n";
  if (diagnostics == nullptr) {
    out << "<p>" << E(DiagnosticsHowTo(audit)) << "</p></section>\n";
    return;
  }
  const std::string response = ResponseLabel(audit);
  const StandOutRules rules = MakeStandOutRules(*diagnostics);
  const std::vector<StandOutRow> stand_out = RowsThatStandOut(*diagnostics, rules);
  std::set<const RowDiagnostic*> flagged;
  for (const StandOutRow& row : stand_out) flagged.insert(row.row);
  std::vector<const RowDiagnostic*> plotted;
  for (const RowDiagnostic& row : diagnostics->result.rows) {
    if (row.standardized_residual && std::isfinite(*row.standardized_residual)) plotted.push_back(&row);
  }
  out << "<p>" << plotted.size() << " of " << diagnostics->result.rows.size()
      << " rows have a standardised residual and are plotted; PRESS " << E(Format(diagnostics->result.press, 6))
      << ", largest leverage " << E(Format(diagnostics->result.max_leverage)) << ". Rows that stand out are "
      << "drawn ▲ in vermillion.</p>\n";
  XyPlot::Layout layout;
  layout.width = options.chart_width;
  auto row_title = [](const RowDiagnostic& row) {
    return "line " + std::to_string(row.line) + ": fitted " + Format(row.fitted, 6) + ", residual " +
           Format(row.residual, 4) + ", std. residual " + Format(row.standardized_residual, 3) +
           ", leverage " + Format(row.leverage, 3) + ", Cook's D " + Format(row.cooks_distance, 3);
  };
  auto point = [&](const RowDiagnostic& row, double x, double y, const char* kind) {
    const bool is_flagged = flagged.count(&row) != 0;
    return Marker(is_flagged ? MarkerShape::kTriangleUp : MarkerShape::kCircle, x, y, is_flagged ? 4 : 2.6,
                  std::string("pt ") + kind + (is_flagged ? " flagged" : ""), is_flagged ? row_title(row) : "");
  };

  {  // Residuals against fitted values.
    std::vector<double> xs, ys;
    for (const RowDiagnostic* row : plotted) {
      xs.push_back(row->fitted);
      ys.push_back(row->residual);
    }
    ys.push_back(0);
    const XyPlot plot(layout, ScaleOf(xs), ScaleOf(ys));
    out << "<figure>" << plot.Begin("resid-chart", "Residuals against fitted values", "fitted " + response,
                                    "residual (" + response + " units)")
        << plot.HorizontalLine(0, "ref", "zero");
    for (const RowDiagnostic* row : plotted) out << point(*row, plot.X(row->fitted), plot.Y(row->residual), "resid");
    out << XyPlot::End() << "<figcaption>A curve suggests a missing term or transform; a funnel, "
        << "variance that changes with the level.</figcaption></figure>\n";
  }
  {  // Normal quantile plot.
    const auto pairs = NormalQuantilePairs(*diagnostics);
    std::vector<double> xs, ys;
    for (const auto& [theory, observed] : pairs) {
      xs.push_back(theory);
      ys.push_back(observed);
    }
    const XyPlot plot(layout, ScaleOf(xs), ScaleOf(ys));
    out << "<figure>" << plot.Begin("qq-chart", "Normal quantile plot of standardised residuals",
                                    "standard normal quantile", "standardised residual");
    const double lo = std::max(plot.x_scale().lo, plot.y_scale().lo), hi = std::min(plot.x_scale().hi, plot.y_scale().hi);
    if (lo < hi) {
      out << "<polyline class=\"ref\" points=\"" << PointList({{plot.X(lo), plot.Y(lo)}, {plot.X(hi), plot.Y(hi)}})
          << "\"/>\n";
    }
    // Sorted residuals lose their rows; flag by value (ties are drawn alike anyway).
    for (const auto& [theory, observed] : pairs) {
      const bool extreme = std::abs(observed) > rules.standardized_residual;
      out << Marker(extreme ? MarkerShape::kTriangleUp : MarkerShape::kCircle, plot.X(theory), plot.Y(observed),
                    extreme ? 4 : 2.6, extreme ? "pt qq flagged" : "pt qq",
                    extreme ? "standardised residual " + Format(observed, 3) : "");
    }
    out << XyPlot::End() << "<figcaption>Points on the dashed line y = x mean normal errors; bends at "
        << "the ends mean heavier or lighter tails.</figcaption></figure>\n";
  }
  {  // Leverage against standardised residual, with Cook's distance contours.
    std::vector<double> xs{0}, ys;
    for (const RowDiagnostic* row : plotted) {
      xs.push_back(row->leverage);
      ys.push_back(*row->standardized_residual);
    }
    const XyPlot plot(layout, ScaleOf(xs), ScaleOf(ys));
    out << "<figure>" << plot.Begin("lev-chart", "Leverage against standardised residual",
                                    "leverage h (hat value)", "standardised residual");
    out << plot.VerticalLine(rules.leverage, "ref", "2k/n");
    // Cook's distance D = r^2 h / (k (1 - h)), so the contour of D is r = ±sqrt(D k (1 - h) / h).
    const double k = static_cast<double>(diagnostics->k);
    bool any_contour = false;
    for (const double distance : {0.5, 1.0}) {
      for (const double sign : {1.0, -1.0}) {
        std::vector<std::pair<double, double>> line;
        const double h_lo = std::max(plot.x_scale().lo, 1e-6), h_hi = std::min(plot.x_scale().hi, 1 - 1e-9);
        for (int sample = 0; sample <= 120 && h_lo < h_hi; ++sample) {
          const double h = h_lo + (h_hi - h_lo) * sample / 120.0;
          const double r = sign * std::sqrt(distance * k * (1 - h) / h);
          if (r >= plot.y_scale().lo && r <= plot.y_scale().hi) line.emplace_back(plot.X(h), plot.Y(r));
        }
        if (line.size() >= 2) {
          any_contour = true;
          out << "<polyline class=\"contour" << (distance == 1.0 ? " one" : "") << "\" points=\""
              << PointList(line) << "\"/>";
          if (sign > 0) {
            out << "<text class=\"ref-label\" x=\"" << Format(line.back().first - 4, 6) << "\" y=\""
                << Format(line.back().second - 5, 6) << "\" text-anchor=\"end\">Cook's D " << Format(distance, 2)
                << "</text>";
          }
          out << "\n";
        }
      }
    }
    for (const RowDiagnostic* row : plotted) {
      out << point(*row, plot.X(row->leverage), plot.Y(*row->standardized_residual), "lev");
    }
    out << XyPlot::End() << "<figcaption>Contours: Cook's distance 0.5 (dashed) and 1 (dash-dot), "
        << "r² = D k (1 - h) / h with k = " << diagnostics->k << ". "
        << (any_contour ? "Rows beyond a contour move the fit a lot."
                        : "Both contours lie outside the plotted range: no row comes near Cook's distance 0.5.")
        << "</figcaption></figure>\n";
  }

  out << "<h3>Rows that stand out</h3><p>Thresholds (common practice, not tests): Cook's distance above "
      << "4/n = " << E(Format(rules.cooks, 3)) << ", |standardised residual| above 3, leverage above 2k/n = "
      << E(Format(rules.leverage, 3)) << ". " << stand_out.size() << " rows.</p>\n";
  if (!stand_out.empty()) {
    out << TableStart({"line", "fitted", "residual", "std. residual", "leverage", "Cook's D", "why"});
    for (std::size_t index = 0; index < stand_out.size() && index < options.max_outlier_rows; ++index) {
      const RowDiagnostic& row = *stand_out[index].row;
      std::string reasons;
      for (const std::string& reason : stand_out[index].reasons) reasons += (reasons.empty() ? "" : "; ") + reason;
      out << "<tr>" << Cell(std::to_string(row.line), true) << Cell(Format(row.fitted, 6), true)
          << Cell(Format(row.residual, 4), true) << Cell(Format(row.standardized_residual, 3), true)
          << Cell(Format(row.leverage, 3), true) << Cell(Format(row.cooks_distance, 3), true) << Cell(reasons)
          << "</tr>\n";
    }
    out << kTableEnd;
    if (stand_out.size() > options.max_outlier_rows) {
      out << "<p class=\"note\">… and " << stand_out.size() - options.max_outlier_rows
          << " more (see the text report).</p>\n";
    }
  }
  out << "</section>\n";
}

// A section the report has no special layout for (validation, stability): objects as
// key-value tables, arrays of objects as tables, other values as text.
void Generic(std::ostringstream& out, const json& value, int depth) {
  if (depth > 4) {
    out << "<code>" << E(value.dump()) << "</code>";
  } else if (value.is_object()) {
    out << "<div class=\"table-wrap\"><table><tbody>";
    for (const auto& [key, item] : value.items()) {
      out << "<tr><th>" << E(key) << "</th><td>";
      Generic(out, item, depth + 1);
      out << "</td></tr>";
    }
    out << "</tbody></table></div>";
  } else if (value.is_array() && !value.empty() && value[0].is_object()) {
    std::vector<std::string> keys;
    for (const json& item : value) {
      for (const auto& [key, unused] : item.items()) {
        if (std::find(keys.begin(), keys.end(), key) == keys.end()) keys.push_back(key);
      }
    }
    out << TableStart(keys);
    for (const json& item : value) {
      out << "<tr>";
      for (const std::string& key : keys) {
        out << (Get(item, key).is_number() ? "<td class=\"num\">" : "<td>");
        Generic(out, Get(item, key), depth + 1);
        out << "</td>";
      }
      out << "</tr>\n";
    }
    out << kTableEnd;
  } else if (value.is_array()) {
    std::string text;
    for (const json& item : value) text += (text.empty() ? "" : ", ") + (item.is_number_float() ? Format(Number(item), 6) : Text(item));
    out << E(text);
  } else if (value.is_number_float()) {
    out << E(Format(Number(value), 6));
  } else {
    out << E(Text(value));
  }
}

void Integrity(std::ostringstream& out, const json& audit) {
  const IntegrityFacts facts = ReadIntegrity(audit);
  out << "<section id=\"integrity\"><h2>Integrity</h2><dl class=\"facts\">\n";
  out << "<dt>Seal</dt><dd><span class=\"digest\">" << E(facts.seal.empty() ? "(none)" : facts.seal) << "</span>";
  if (facts.seal_matches) {
    out << (*facts.seal_matches ? " (recomputed: matches the content)"
                                : " <span class=\"bad\">(recomputed: DOES NOT MATCH the content)</span>");
  }
  out << "</dd>\n<dt>Signature</dt><dd>";
  if (facts.signed_document) {
    out << "present, " << E(facts.signature_algorithm) << ", public key <span class=\"digest\">"
        << E(facts.public_key) << "</span>";
    if (facts.signature_consistent) {
      out << (*facts.signature_consistent ? " (verifies against that key)"
                                          : " <span class=\"bad\">(DOES NOT verify against that key)</span>");
    }
  } else {
    out << "absent";
  }
  out << "</dd>\n";
  if (facts.has_parent) {
    out << "<dt>Parent seal</dt><dd><span class=\"digest\">" << E(facts.parent_seal) << "</span> (created "
        << E(facts.parent_created_at) << ")</dd>\n<dt>Parent data</dt><dd class=\"digest\">"
        << E(facts.parent_data_sha256) << "</dd>\n";
  }
  out << "<dt>Genesis</dt><dd class=\"digest\">" << E(facts.genesis) << "</dd>\n";
  out << "<dt>Route digest</dt><dd><span class=\"digest\">" << E(facts.route_digest) << "</span> ("
      << E(facts.step_count) << " steps)</dd>\n";
  out << "<dt>Tool</dt><dd>" << E(facts.tool_version) << ", commit <span class=\"digest\">" << E(facts.tool_commit)
      << "</span> (" << E(facts.tool_build) << ")</dd>\n";
  out << "<dt>Format</dt><dd>" << E(facts.format_version) << ", created " << E(facts.created_at) << "</dd>\n</dl>\n";
  out << "<p class=\"note\">The seal and digests catch accidental and casual edits; only a signature "
      << "checked against a public key obtained separately shows who produced the audit. Check it "
      << "with <code>stepledger verify AUDIT.json --data " << E(Text(Get(Get(audit, "data"), "file")))
      << "</code>.</p></section>\n";
}

}  // namespace

std::string RenderHtmlReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  options.Validate();
  CheckAuditShape(audit);
  const std::string title =
      options.title.empty() ? "Selection report: " + Text(Get(Get(audit, "data"), "file")) : options.title;
  std::ostringstream out;
  out << "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      << "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
      << "<meta name=\"generator\" content=\"stepledger report\">\n<title>" << E(title) << "</title>\n<style>"
      << kStyle << "</style>\n</head>\n<body>\n<main>\n<header><h1>" << E(title) << "</h1>\n<p class=\"meta\">"
      << "Audit created " << E(Text(Get(audit, "created_at"))) << " by "
      << E(Text(Get(Get(audit, "tool"), "name")) + " " + Text(Get(Get(audit, "tool"), "version")))
      << "; seal <span class=\"digest\">" << E(Text(Get(audit, "seal"))) << "</span></p></header>\n";
  out << "<nav><ol><li><a href=\"#summary\">Summary</a></li><li><a href=\"#cautions\">Cautions</a></li>"
      << "<li><a href=\"#plan\">Plan</a></li><li><a href=\"#data\">Data</a></li>"
      << "<li><a href=\"#route\">Route</a></li><li><a href=\"#candidates\">Candidates</a></li>"
      << (audit.contains("subsets") ? "<li><a href=\"#subsets\">All subsets</a></li>" : "")
      << "<li><a href=\"#model\">Final model</a></li><li><a href=\"#diagnostics\">Diagnostics</a></li>"
      << (audit.contains("validation") ? "<li><a href=\"#validation\">Validation</a></li>" : "")
      << (audit.contains("stability") ? "<li><a href=\"#stability\">Stability</a></li>" : "")
      << "<li><a href=\"#integrity\">Integrity</a></li></ol></nav>\n";
  Summary(out, audit);
  Cautions(out, audit);
  Plan(out, audit);
  Data(out, audit, options);
  Route(out, audit, options);
  Candidates(out, audit, options);
  Subsets(out, audit, options);
  FinalModel(out, audit, options);
  Diagnostics(out, audit, diagnostics, options);
  for (const char* key : {"validation", "stability"}) {
    if (!audit.contains(key)) continue;
    out << "<section id=\"" << key << "\"><h2>" << (std::string(key) == "validation" ? "Validation" : "Stability")
        << "</h2>\n";
    Generic(out, audit[key], 0);
    out << "</section>\n";
  }
  Integrity(out, audit);
  out << "<footer class=\"note\"><p>Rendered from the audit file alone"
      << (diagnostics != nullptr ? " and one pass over its data for the diagnostics" : "")
      << ". This file needs nothing else to be read or printed.</p></footer>\n</main>\n</body>\n</html>\n";
  return out.str();
}

}  // namespace stepledger

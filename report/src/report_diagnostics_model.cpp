// The diagnostics section of the report model: our own choice of views, each bounded by
// ReportOptions whatever the number of rows — Cook's distance by line number (the largest per
// line-range bin, rows above the 4/n line drawn on top up to a cap), residuals against fitted
// values as a density (a fixed grid of binned counts, rows that stand out on top) and a
// histogram of standardised residuals with the standard normal curve — and the rows that stand
// out, sorted by Cook's distance. Also the CSV of all of them (`report --rows-out`).

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <numbers>

#include "report_internal.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace report_detail {
namespace {

using V = ReportValue;

struct Range {
  double lo = std::numeric_limits<double>::infinity();
  double hi = -std::numeric_limits<double>::infinity();
  void Add(double value) {
    if (!std::isfinite(value)) return;
    lo = std::min(lo, value);
    hi = std::max(hi, value);
  }
  bool Empty() const { return lo > hi; }
  // A degenerate range (one value) is widened so that bins have a width.
  void Widen() {
    if (Empty()) {
      lo = 0;
      hi = 1;
    } else if (hi - lo <= 1e-12 * std::max(1.0, std::abs(hi))) {
      const double pad = lo == 0 ? 0.5 : std::abs(lo) * 0.05;
      lo -= pad;
      hi += pad;
    }
  }
};

// The bin of value in [lo, hi] cut into bins equal parts (the last bin closed on the right).
std::size_t BinOf(double value, double lo, double hi, std::size_t bins) {
  const double position = (value - lo) / (hi - lo) * static_cast<double>(bins);
  if (!(position > 0)) return 0;
  return std::min(bins - 1, static_cast<std::size_t>(position));
}

std::string RowTitle(const RowDiagnostic& row) {
  return "line " + FormatCount(static_cast<std::int64_t>(row.line)) + ": fitted " + FormatQuantity(row.fitted, 6) +
         ", residual " + FormatQuantity(row.residual) + ", std. residual " +
         FormatStatistic(row.standardized_residual) + ", leverage " + FormatQuantity(row.leverage, 3) +
         ", Cook's D " + FormatQuantity(row.cooks_distance, 3);
}

std::string NotDrawn(std::size_t total, std::size_t drawn, const char* what) {
  if (total <= drawn) return "";
  return " " + FormatCount(static_cast<std::int64_t>(total - drawn)) + " more " + what +
         " are not drawn (the cap keeps the file small); --rows-out lists them all.";
}

ReportChart CooksChart(const ReportDiagnostics& diagnostics, const StandOutRules& rules,
                       const ReportOptions& options) {
  const auto& rows = diagnostics.result.rows;
  Range lines;
  for (const RowDiagnostic& row : rows) lines.Add(static_cast<double>(row.line));
  lines.Widen();
  const std::size_t bins = std::max<std::size_t>(1, std::min(options.cooks_bins, rows.size()));
  std::vector<const RowDiagnostic*> largest(bins, nullptr);
  std::size_t above = 0;
  for (const RowDiagnostic& row : rows) {
    if (!row.cooks_distance) continue;
    above += *row.cooks_distance > rules.cooks ? 1 : 0;
    const RowDiagnostic*& slot = largest[BinOf(static_cast<double>(row.line), lines.lo, lines.hi, bins)];
    if (slot == nullptr || *row.cooks_distance > *slot->cooks_distance) slot = &row;
  }
  ReportChart chart;
  chart.id = "cooks-chart";
  chart.kind = ChartKind::kScatter;
  chart.title = "Cook's distance by line number";
  chart.x_label = "line number in the data file";
  chart.y_label = "Cook's distance";
  chart.y_include = {0, rules.cooks};
  chart.references.push_back({false, rules.cooks, "4/n = " + FormatQuantity(rules.cooks, 3)});
  ChartSeries binned{"largest per line range", false, true, {}};
  const double width = (lines.hi - lines.lo) / static_cast<double>(bins);
  for (std::size_t bin = 0; bin < bins; ++bin) {
    const RowDiagnostic* row = largest[bin];
    if (row == nullptr) continue;
    const double first = lines.lo + width * static_cast<double>(bin);
    ChartPoint point;
    point.x = static_cast<double>(row->line);
    point.y = *row->cooks_distance;
    point.css_class = "cooks-bin";
    point.title = "lines " + FormatCount(static_cast<std::int64_t>(std::ceil(first))) + " to " +
                  FormatCount(static_cast<std::int64_t>(std::floor(first + width))) + ": largest Cook's D " +
                  FormatQuantity(row->cooks_distance, 3) + " (line " +
                  FormatCount(static_cast<std::int64_t>(row->line)) + ")";
    binned.points.push_back(std::move(point));
  }
  chart.series.push_back(std::move(binned));
  // Rows above the 4/n line, largest first, up to the cap.
  StandOutRules cooks_only = rules;
  cooks_only.standardized_residual = std::numeric_limits<double>::infinity();
  cooks_only.leverage = std::numeric_limits<double>::infinity();
  std::size_t total = 0;
  ChartSeries flagged{"above 4/n", false, true, {}};
  for (const RowDiagnostic* row : TopRowsThatStandOut(diagnostics, cooks_only, options.max_flagged_points, &total)) {
    if (!row->cooks_distance) continue;  // leverage 1: no distance to draw
    flagged.points.push_back({static_cast<double>(row->line), *row->cooks_distance, "cooks-flagged", RowTitle(*row),
                              "", std::nullopt, std::nullopt, "", true});
  }
  chart.caption = "Each ● is the largest Cook's distance of a range of " +
                  FormatQuantity(std::max(1.0, width), 3) + " lines (" + FormatCount(static_cast<std::int64_t>(bins)) +
                  " ranges); ▲ rows above the dashed 4/n line, the threshold of the table below (" +
                  FormatCount(static_cast<std::int64_t>(above)) + " rows)." +
                  NotDrawn(above, flagged.points.size(), "such rows");
  chart.series.push_back(std::move(flagged));
  return chart;
}

ReportChart DensityChart(const json& audit, const ReportDiagnostics& diagnostics, const ReportOptions& options,
                         const std::vector<const RowDiagnostic*>& stand_out_top, std::size_t stand_out_total) {
  const std::string response = ResponseLabel(audit);
  Range fitted, residual;
  for (const RowDiagnostic& row : diagnostics.result.rows) {
    fitted.Add(row.fitted);
    residual.Add(row.residual);
  }
  residual.Add(0);
  fitted.Widen();
  residual.Widen();
  ChartGrid grid;
  grid.x_lo = fitted.lo;
  grid.x_hi = fitted.hi;
  grid.y_lo = residual.lo;
  grid.y_hi = residual.hi;
  grid.columns = options.density_columns;
  grid.rows = options.density_rows;
  grid.counts.assign(grid.columns * grid.rows, 0);
  for (const RowDiagnostic& row : diagnostics.result.rows) {
    if (!std::isfinite(row.fitted) || !std::isfinite(row.residual)) continue;
    ++grid.counts[BinOf(row.residual, grid.y_lo, grid.y_hi, grid.rows) * grid.columns +
                  BinOf(row.fitted, grid.x_lo, grid.x_hi, grid.columns)];
  }
  ReportChart chart;
  chart.id = "density-chart";
  chart.kind = ChartKind::kDensity;
  chart.title = "Residuals against fitted values (density)";
  chart.x_label = "fitted " + response;
  chart.y_label = "residual (" + response + " units)";
  chart.x_include = {grid.x_lo, grid.x_hi};
  chart.y_include = {grid.y_lo, grid.y_hi, 0};
  chart.references.push_back({false, 0, "zero"});
  const std::uint64_t most = grid.counts.empty() ? 0 : *std::max_element(grid.counts.begin(), grid.counts.end());
  chart.grid = std::move(grid);
  ChartSeries flagged{"rows that stand out", false, true, {}};
  for (const RowDiagnostic* row : stand_out_top) {
    if (flagged.points.size() >= options.max_flagged_points) break;
    flagged.points.push_back({row->fitted, row->residual, "resid-flagged", RowTitle(*row), "", std::nullopt,
                              std::nullopt, "", true});
  }
  chart.caption = "Rows binned on a " + FormatCount(static_cast<std::int64_t>(options.density_columns)) + " by " +
                  FormatCount(static_cast<std::int64_t>(options.density_rows)) +
                  " grid; darker cells hold more rows (the darkest " +
                  FormatCount(static_cast<std::int64_t>(most)) +
                  "). ▲ rows that stand out. A curve suggests a missing term or transform; a funnel, variance "
                  "that changes with the level." +
                  NotDrawn(stand_out_total, flagged.points.size(), "rows that stand out");
  chart.series.push_back(std::move(flagged));
  return chart;
}

ReportChart HistogramChart(const ReportDiagnostics& diagnostics, const ReportOptions& options) {
  double largest = 0;
  std::uint64_t n = 0;
  for (const RowDiagnostic& row : diagnostics.result.rows) {
    if (row.standardized_residual && std::isfinite(*row.standardized_residual)) {
      largest = std::max(largest, std::abs(*row.standardized_residual));
      ++n;
    }
  }
  // Symmetric, at least ±4 (common practice: nearly all of a normal sample) and at most ±8, so
  // that one wild row cannot squash the bins; rows beyond go into the end bins.
  const double limit = std::clamp(std::ceil(largest), 4.0, 8.0);
  ChartGrid grid;
  grid.x_lo = -limit;
  grid.x_hi = limit;
  grid.y_lo = 0;
  grid.y_hi = 1;
  grid.columns = options.histogram_bins;
  grid.rows = 1;
  grid.counts.assign(grid.columns, 0);
  for (const RowDiagnostic& row : diagnostics.result.rows) {
    if (row.standardized_residual && std::isfinite(*row.standardized_residual)) {
      ++grid.counts[BinOf(std::clamp(*row.standardized_residual, -limit, limit), -limit, limit, grid.columns)];
    }
  }
  ReportChart chart;
  chart.id = "hist-chart";
  chart.kind = ChartKind::kHistogram;
  chart.title = "Standardised residuals: histogram and the standard normal curve";
  chart.x_label = "standardised residual";
  chart.y_label = "rows per bin";
  chart.x_include = {-limit, limit};
  chart.y_include = {0};
  // The curve the bars should follow under normal errors: n * bin width * phi(x), phi the
  // standard normal density exp(-x^2 / 2) / sqrt(2 pi) (its definition).
  const double width = 2 * limit / static_cast<double>(grid.columns);
  ChartSeries curve{"standard normal", true, false, {}};
  constexpr int kCurvePoints = 97;
  for (int index = 0; index < kCurvePoints; ++index) {
    const double x = -limit + 2 * limit * index / (kCurvePoints - 1);
    const double density = std::exp(-x * x / 2) / std::sqrt(2 * std::numbers::pi);
    curve.points.push_back({x, static_cast<double>(n) * width * density, "normal-curve", std::nullopt, "",
                            std::nullopt, std::nullopt, "", true});
    chart.y_include.push_back(curve.points.back().y);
  }
  for (const std::uint64_t count : grid.counts) chart.y_include.push_back(static_cast<double>(count));
  chart.grid = std::move(grid);
  chart.series.push_back(std::move(curve));
  chart.caption = FormatCount(static_cast<std::int64_t>(n)) + " rows in " +
                  FormatCount(static_cast<std::int64_t>(options.histogram_bins)) + " bins from " +
                  FormatQuantity(-limit) + " to " + FormatQuantity(limit) +
                  " (rows beyond fall in the end bins); the curve is what normal errors would give. Heavy "
                  "tails or a skew show as bars beyond the curve.";
  return chart;
}

}  // namespace

ReportSection DiagnosticsSection(const json& audit, const ReportDiagnostics* diagnostics,
                                 const ReportOptions& options) {
  ReportSection section{"diagnostics", "Diagnostics", {}};
  if (diagnostics == nullptr) {
    section.blocks.push_back(ReportParagraph{DiagnosticsHowTo(audit), ""});
    return section;
  }
  const StandOutRules rules = MakeStandOutRules(*diagnostics);
  std::size_t stand_out_total = 0;
  const std::size_t listed = std::max(options.max_outlier_rows, options.max_flagged_points);
  const std::vector<const RowDiagnostic*> top =
      TopRowsThatStandOut(*diagnostics, rules, listed, &stand_out_total);
  section.blocks.push_back(ReportFacts{{
      {"Rows diagnosed", V::Count(static_cast<std::int64_t>(diagnostics->result.rows.size()))},
      {"Largest leverage", V::Quantity(diagnostics->result.max_leverage)},
      {"PRESS", V::Quantity(diagnostics->result.press, 6)},
      {"Residual SD", V::Quantity(diagnostics->sigma)},
      {"Rows that stand out", V::Count(static_cast<std::int64_t>(stand_out_total))},
  }});
  section.blocks.push_back(CooksChart(*diagnostics, rules, options));
  section.blocks.push_back(DensityChart(audit, *diagnostics, options, top, stand_out_total));
  section.blocks.push_back(HistogramChart(*diagnostics, options));

  section.blocks.push_back(ReportParagraph{
      "Rows that stand out, largest Cook's distance first. Thresholds (common practice, not tests): "
      "Cook's distance above 4/n = " + FormatQuantity(rules.cooks, 3) +
          ", |standardised residual| above 3, leverage above 2k/n = " + FormatQuantity(rules.leverage, 3) + ". " +
          FormatCount(static_cast<std::int64_t>(stand_out_total)) +
          " rows. `stepledger report AUDIT --data DATA --rows-out FILE` writes them all as CSV.",
      ""});
  if (stand_out_total > 0) {
    ReportTable table;
    table.columns = {{"line", ValueKind::kCount},          {"fitted", ValueKind::kQuantity},
                     {"residual", ValueKind::kQuantity},   {"std. residual", ValueKind::kStatistic},
                     {"leverage", ValueKind::kQuantity},   {"Cook's D", ValueKind::kQuantity},
                     {"why", ValueKind::kText}};
    for (std::size_t index = 0; index < top.size() && index < options.max_outlier_rows; ++index) {
      const RowDiagnostic& row = *top[index];
      table.rows.push_back({V::Count(static_cast<std::int64_t>(row.line)), V::Quantity(row.fitted, 6),
                            V::Quantity(row.residual), V::Statistic(row.standardized_residual),
                            V::Quantity(row.leverage, 3), V::Quantity(row.cooks_distance, 3),
                            V::Text(StandOutReasons(row, rules))});
    }
    table.rows_not_listed = stand_out_total - table.rows.size();
    section.blocks.push_back(std::move(table));
  }
  return section;
}

}  // namespace report_detail

namespace {

// Shortest text that reads back to the same double (std::to_chars); empty when undefined.
std::string ExactNumber(std::optional<double> value) {
  if (!value || !std::isfinite(*value)) return "";
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, *value);
  return std::string(buffer, result.ptr);
}

std::string QuotedCsvField(const std::string& text) {
  if (text.find_first_of(",\"\n\r") == std::string::npos) return text;
  std::string quoted = "\"";
  for (const char character : text) quoted += character == '"' ? std::string("\"\"") : std::string(1, character);
  return quoted + "\"";
}

}  // namespace

std::string RenderRowsThatStandOutCsv(const ReportDiagnostics& diagnostics) {
  using namespace report_detail;
  const StandOutRules rules = MakeStandOutRules(diagnostics);
  std::size_t total = 0;
  const auto rows = TopRowsThatStandOut(diagnostics, rules, std::numeric_limits<std::size_t>::max(), &total);
  std::string csv = "line,fitted,residual,standardized_residual,leverage,cooks_distance,reasons\n";
  for (const RowDiagnostic* row : rows) {
    csv += std::to_string(row->line) + "," + ExactNumber(row->fitted) + "," + ExactNumber(row->residual) + "," +
           ExactNumber(row->standardized_residual) + "," + ExactNumber(row->leverage) + "," +
           ExactNumber(row->cooks_distance) + "," + QuotedCsvField(StandOutReasons(*row, rules)) + "\n";
  }
  return csv;
}

}  // namespace stepledger

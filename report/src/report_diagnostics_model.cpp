// The diagnostics section of the report model: our own choice of views, each drawn from the
// bounded summary of engine/diagnostics.h and bounded by ReportOptions whatever the number of
// rows — Cook's distance by line number (the largest per range of lines, the largest distances
// above the 4/n line drawn on top), residuals against fitted values as a density (binned
// counts, rows that stand out on top), a histogram of standardised residuals with the standard
// normal curve, their quantiles against the normal's — and the rows that stand out, largest
// Cook's distance first. Also the records of the CSV of all of them (`report --rows-out`).

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <numbers>

#include "report_internal.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace report_detail {
namespace {

using V = ReportValue;

std::string CountText(std::uint64_t count) { return FormatCount(static_cast<std::int64_t>(count)); }

// "line 12: ..." or, in a data set, "line 12 of b.csv: ...".
std::string RowTitle(const RowDiagnostic& row, const std::vector<std::string>& set_files) {
  return RowPlaceText(row.line, row.file, set_files) + ": fitted " + FormatQuantity(row.fitted, 6) + ", residual " +
         FormatQuantity(row.residual) + ", std. residual " + FormatStatistic(row.standardized_residual) +
         ", leverage " + FormatQuantity(row.leverage, 3) + ", Cook's D " + FormatQuantity(row.cooks_distance, 3);
}

std::string NotDrawn(std::uint64_t total, std::size_t drawn, const char* what) {
  if (total <= drawn) return "";
  return " " + CountText(total - drawn) + " more " + what + " are not drawn (the report keeps the largest); " +
         "--rows-out lists them all.";
}

// The bins [first, last] that hold something, merged in equal groups of `group` so that at most
// `most` remain (the last group may reach past `last`: it is empty there).
struct Coarsening {
  std::size_t first = 0, group = 1, count = 0;
};

template <typename Occupied>
Coarsening Coarsen(std::size_t bins, std::size_t most, Occupied occupied) {
  Coarsening coarsening;
  std::size_t first = bins, last = 0;
  for (std::size_t bin = 0; bin < bins; ++bin) {
    if (!occupied(bin)) continue;
    first = std::min(first, bin);
    last = bin;
  }
  if (first == bins) return coarsening;
  const std::size_t span = last - first + 1;
  coarsening.first = first;
  coarsening.group = (span + most - 1) / most;
  coarsening.count = (span + coarsening.group - 1) / coarsening.group;
  return coarsening;
}

ReportChart CooksChart(const DiagnosticsResult& result, const ReportOptions& options,
                       const std::vector<std::string>& set_files) {
  const LineBinnedCooks& binned = result.cooks_by_line;
  // A data set's lines start again in every file: its axis is the record number across the set.
  const std::string unit = binned.by_record ? "record" : "line";
  const Coarsening coarse =
      Coarsen(binned.lines.bins, options.cooks_bins, [&](std::size_t bin) { return binned.largest[bin].has_value(); });
  ReportChart chart;
  chart.id = "cooks-chart";
  chart.kind = ChartKind::kScatter;
  chart.title = "Cook's distance by " + unit + " number";
  chart.x_label = binned.by_record ? "record number across the data set's files" : "line number in the data file";
  chart.y_label = "Cook's distance";
  const double threshold = result.thresholds.cooks;
  chart.y_include = {0, threshold};
  chart.references.push_back({false, threshold, "4/n = " + FormatQuantity(threshold, 3)});
  ChartSeries largest{"largest per line range", false, true, {}, {}};
  const double width = binned.lines.width * static_cast<double>(coarse.group);
  for (std::size_t index = 0; index < coarse.count; ++index) {
    const std::optional<RowDiagnostic>* best = nullptr;
    for (std::size_t bin = coarse.first + index * coarse.group;
         bin < coarse.first + (index + 1) * coarse.group && bin < binned.lines.bins; ++bin) {
      if (binned.largest[bin] && (best == nullptr || LargerCooksDistanceFirst(*binned.largest[bin], **best))) {
        best = &binned.largest[bin];
      }
    }
    if (best == nullptr) continue;
    const RowDiagnostic& row = **best;
    const double first = binned.lines.lo + binned.lines.width * static_cast<double>(coarse.first) +
                         width * static_cast<double>(index);
    ChartPoint point;
    point.x = binned.PositionOf(row);
    point.y = *row.cooks_distance;
    point.css_class = "cooks-bin";
    point.title = unit + "s " + FormatCount(static_cast<std::int64_t>(std::max(1.0, std::ceil(first)))) + " to " +
                  FormatCount(static_cast<std::int64_t>(std::ceil(first + width) - 1)) + ": largest Cook's D " +
                  FormatQuantity(row.cooks_distance, 3) + " (" + RowPlaceText(row.line, row.file, set_files) + ")";
    largest.points.push_back(std::move(point));
  }
  const std::size_t ranges = largest.points.size();
  chart.series.push_back(std::move(largest));
  ChartSeries flagged{"above 4/n", false, true, {}, {}};
  for (const RowDiagnostic& row : result.largest_cooks_distance) {
    if (flagged.points.size() >= options.max_flagged_points) break;
    if (!result.thresholds.CooksAbove(row)) continue;  // also skips leverage 1: no distance to draw
    flagged.points.push_back({binned.PositionOf(row), *row.cooks_distance, "cooks-flagged", RowTitle(row, set_files),
                              "", std::nullopt, std::nullopt, "", true});
  }
  chart.caption = "Each ● is the largest Cook's distance of a range of " + FormatQuantity(std::max(1.0, width), 3) +
                  " " + unit + "s (" + FormatCount(static_cast<std::int64_t>(ranges)) +
                  " ranges with a distance); ▲ the largest distances above the dashed 4/n line, the "
                  "threshold of the table below (" + CountText(result.cooks_above) + " rows)." +
                  NotDrawn(result.cooks_above, flagged.points.size(), "such rows");
  chart.series.push_back(std::move(flagged));
  return chart;
}

ReportChart DensityChart(const json& audit, const DiagnosticsResult& result, const ReportOptions& options,
                         const std::vector<RowDiagnostic>& stand_out_rows, const std::vector<std::string>& set_files) {
  const std::string response = ResponseLabel(audit);
  const GrowingDensity& density = result.fitted_residual_density;
  const std::size_t columns_in = density.x.bins, rows_in = density.y.bins;
  const auto cell = [&](std::size_t row, std::size_t column) { return density.counts[row * columns_in + column]; };
  const Coarsening across = Coarsen(columns_in, options.density_columns, [&](std::size_t column) {
    for (std::size_t row = 0; row < rows_in; ++row) {
      if (cell(row, column) > 0) return true;
    }
    return false;
  });
  const Coarsening down = Coarsen(rows_in, options.density_rows, [&](std::size_t row) {
    for (std::size_t column = 0; column < columns_in; ++column) {
      if (cell(row, column) > 0) return true;
    }
    return false;
  });
  ChartGrid grid;
  grid.columns = std::max<std::size_t>(1, across.count);
  grid.rows = std::max<std::size_t>(1, down.count);
  grid.counts.assign(grid.columns * grid.rows, 0);
  if (density.total > 0) {
    grid.x_lo = density.x.lo + density.x.width * static_cast<double>(across.first);
    grid.x_hi = grid.x_lo + density.x.width * static_cast<double>(across.group * across.count);
    grid.y_lo = density.y.lo + density.y.width * static_cast<double>(down.first);
    grid.y_hi = grid.y_lo + density.y.width * static_cast<double>(down.group * down.count);
    for (std::size_t row = down.first; row < rows_in; ++row) {
      for (std::size_t column = across.first; column < columns_in; ++column) {
        const std::uint64_t count = cell(row, column);
        if (count == 0) continue;
        grid.counts[(row - down.first) / down.group * grid.columns + (column - across.first) / across.group] += count;
      }
    }
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
  const std::uint64_t most = *std::max_element(grid.counts.begin(), grid.counts.end());
  const std::size_t shown_columns = grid.columns, shown_rows = grid.rows;
  chart.grid = std::move(grid);
  ChartSeries flagged{"rows that stand out", false, true, {}, {}};
  for (const RowDiagnostic& row : stand_out_rows) {
    if (flagged.points.size() >= options.max_flagged_points) break;
    flagged.points.push_back({row.fitted, row.residual, "resid-flagged", RowTitle(row, set_files), "", std::nullopt,
                              std::nullopt, "", true});
  }
  chart.caption = CountText(density.total) + " rows binned on a " + CountText(shown_columns) + " by " + CountText(shown_rows) +
                  " grid over the range they occupy; darker cells hold more rows (the darkest " + CountText(most) +
                  "). ▲ the rows that stand out most (largest leverage, Cook's distance or standardised "
                  "residual). A curve suggests a missing term or transform; a funnel, variance that changes "
                  "with the level." +
                  NotDrawn(result.stand_out, flagged.points.size(), "rows that stand out");
  chart.series.push_back(std::move(flagged));
  return chart;
}

// The smallest group of the histogram's fine bins that divides the bins in [-limit, limit] into
// at most `most` equal bars.
std::size_t HistogramGroup(std::size_t fine_bins, std::size_t most) {
  for (std::size_t group = 1; group <= fine_bins; ++group) {
    if (fine_bins % group == 0 && fine_bins / group <= most) return group;
  }
  return fine_bins;
}

ReportChart HistogramChart(const DiagnosticsResult& result, const ReportOptions& options) {
  // Symmetric, at least ±4 (common practice: nearly all of a normal sample) and at most ±8, so
  // that one wild row cannot squash the bins; rows beyond go into the end bins.
  const double limit = std::clamp(std::ceil(result.largest_abs_standardized_residual), 4.0, kStandardizedHistogramLimit);
  const double fine_width = 2 * kStandardizedHistogramLimit / static_cast<double>(kStandardizedHistogramBins);
  const std::size_t fine_in_limit = static_cast<std::size_t>(std::lround(2 * limit / fine_width));
  const std::size_t first_fine = (kStandardizedHistogramBins - fine_in_limit) / 2;
  const std::size_t group = HistogramGroup(fine_in_limit, options.histogram_bins);
  ChartGrid grid;
  grid.x_lo = -limit;
  grid.x_hi = limit;
  grid.y_lo = 0;
  grid.y_hi = 1;
  grid.columns = fine_in_limit / group;
  grid.rows = 1;
  grid.counts.assign(grid.columns, 0);
  std::uint64_t n = 0;
  for (std::size_t fine = 0; fine < result.standardized_histogram.size(); ++fine) {
    const std::size_t inside = std::clamp(fine, first_fine, first_fine + fine_in_limit - 1) - first_fine;
    grid.counts[inside / group] += result.standardized_histogram[fine];
    n += result.standardized_histogram[fine];
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
  ChartSeries curve{"standard normal", true, false, {}, {}};
  constexpr int kCurvePoints = 97;
  for (int index = 0; index < kCurvePoints; ++index) {
    const double x = -limit + 2 * limit * index / (kCurvePoints - 1);
    const double density = std::exp(-x * x / 2) / std::sqrt(2 * std::numbers::pi);
    curve.points.push_back({x, static_cast<double>(n) * width * density, "normal-curve", std::nullopt, "",
                            std::nullopt, std::nullopt, "", true});
    chart.y_include.push_back(curve.points.back().y);
  }
  for (const std::uint64_t count : grid.counts) chart.y_include.push_back(static_cast<double>(count));
  const std::size_t bars = grid.columns;
  chart.grid = std::move(grid);
  chart.series.push_back(std::move(curve));
  chart.caption = CountText(n) + " rows in " + CountText(bars) + " bins from " + FormatQuantity(-limit) + " to " +
                  FormatQuantity(limit) +
                  " (rows beyond fall in the end bins); the curve is what normal errors would give. Heavy "
                  "tails or a skew show as bars beyond the curve.";
  return chart;
}

ReportChart QuantileChart(const DiagnosticsResult& result) {
  ReportChart chart;
  chart.id = "qq-chart";
  chart.kind = ChartKind::kScatter;
  chart.title = "Standardised residuals against normal quantiles";
  chart.x_label = "standard normal quantile";
  chart.y_label = "standardised residual quantile";
  ChartSeries diagonal{"equal quantiles", true, false, {}, {}};
  ChartSeries points{"quantiles", false, true, {}, {}};
  double low = -3, high = 3;
  for (const NormalQuantile& quantile : result.normal_quantiles) {
    low = std::min({low, quantile.normal, quantile.sample});
    high = std::max({high, quantile.normal, quantile.sample});
    points.points.push_back({quantile.normal, quantile.sample, "qq-point",
                             "probability " + FormatQuantity(quantile.probability, 4) + ": normal " +
                                 FormatStatistic(quantile.normal) + ", residuals " + FormatStatistic(quantile.sample),
                             "", std::nullopt, std::nullopt, "", true});
  }
  for (const double end : {low, high}) {
    diagonal.points.push_back({end, end, "normal-curve", std::nullopt, "", std::nullopt, std::nullopt, "", true});
  }
  chart.x_include = {low, high};
  chart.y_include = {low, high};
  const std::uint64_t n = result.rows - result.standardized_residual_undefined;
  chart.caption = "Each ● is a quantile of the " + CountText(n) + " standardised residuals at one of " +
                  CountText(points.points.size()) + " fixed probabilities, against the standard normal's (" +
                  (n <= kDiagnosticsExactQuantileRows ? std::string("exact")
                                                      : std::string("a streaming estimate over this many rows")) +
                  "). Under normal errors they lie on the line; tails bending away from it are heavier (or "
                  "lighter) than normal.";
  chart.series.push_back(std::move(diagonal));
  chart.series.push_back(std::move(points));
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
  const DiagnosticsResult& result = diagnostics->result;
  const StandOutThresholds& thresholds = result.thresholds;
  const std::vector<RowDiagnostic> stand_out_rows = ListedRowsThatStandOut(result);
  section.blocks.push_back(ReportFacts{{
      {"Rows diagnosed", V::Count(static_cast<std::int64_t>(result.rows))},
      {"Largest leverage", V::Quantity(result.max_leverage)},
      {"PRESS", V::Quantity(result.press, 6)},
      {"Residual SD", V::Quantity(diagnostics->sigma)},
      {"Rows that stand out", V::Count(static_cast<std::int64_t>(result.stand_out))},
  }});
  const std::vector<std::string>& set_files = diagnostics->set_files;
  section.blocks.push_back(CooksChart(result, options, set_files));
  section.blocks.push_back(DensityChart(audit, result, options, stand_out_rows, set_files));
  section.blocks.push_back(HistogramChart(result, options));
  if (!result.normal_quantiles.empty()) section.blocks.push_back(QuantileChart(result));

  section.blocks.push_back(ReportParagraph{
      "Rows that stand out, largest Cook's distance first. Thresholds (common practice, not tests): "
      "Cook's distance above 4/n = " + FormatQuantity(thresholds.cooks, 3) +
          ", |standardised residual| above 3, leverage above 2k/n = " + FormatQuantity(thresholds.leverage, 3) +
          ". " + CountText(result.stand_out) + " rows (" + CountText(result.cooks_above) + " by Cook's distance, " +
          CountText(result.standardized_residual_above) + " by standardised residual, " + CountText(result.leverage_above) +
          " by leverage). Listed: those among the " + CountText(kDiagnosticsTopRows) +
          " largest of each measure. `stepledger report AUDIT --data DATA --rows-out FILE` writes them all "
          "as CSV.",
      ""});
  if (result.stand_out > 0) {
    ReportTable table;
    table.columns = {{"line", ValueKind::kCount},          {"fitted", ValueKind::kQuantity},
                     {"residual", ValueKind::kQuantity},   {"std. residual", ValueKind::kStatistic},
                     {"leverage", ValueKind::kQuantity},   {"Cook's D", ValueKind::kQuantity},
                     {"why", ValueKind::kText}};
    // A data set's lines start again in every file: the file comes first.
    if (!set_files.empty()) table.columns.insert(table.columns.begin(), {"file", ValueKind::kText});
    for (std::size_t index = 0; index < stand_out_rows.size() && index < options.max_outlier_rows; ++index) {
      const RowDiagnostic& row = stand_out_rows[index];
      std::vector<ReportValue> cells{V::Count(static_cast<std::int64_t>(row.line)), V::Quantity(row.fitted, 6),
                                     V::Quantity(row.residual), V::Statistic(row.standardized_residual),
                                     V::Quantity(row.leverage, 3), V::Quantity(row.cooks_distance, 3),
                                     V::Text(StandOutReasons(row, thresholds))};
      if (!set_files.empty()) cells.insert(cells.begin(), V::Text(row.file < set_files.size() ? set_files[row.file] : ""));
      table.rows.push_back(std::move(cells));
    }
    table.rows_not_listed = static_cast<std::size_t>(result.stand_out) - table.rows.size();
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

std::string StandOutRowCsv(const RowDiagnostic& row, const StandOutThresholds& thresholds,
                           const std::vector<std::string>& set_files) {
  const std::string file =
      set_files.empty() ? std::string() : QuotedCsvField(row.file < set_files.size() ? set_files[row.file] : "") + ",";
  return file + std::to_string(row.line) + "," + ExactNumber(row.fitted) + "," + ExactNumber(row.residual) + "," +
         ExactNumber(row.standardized_residual) + "," + ExactNumber(row.leverage) + "," +
         ExactNumber(row.cooks_distance) + "," + QuotedCsvField(report_detail::StandOutReasons(row, thresholds)) +
         "\n";
}

}  // namespace stepledger

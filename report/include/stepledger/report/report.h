#pragma once
// The reviewer report of an audit (DESIGN.md §8): one typed ReportModel built once from the
// audit (and, optionally, the per-row diagnostics of its final model), rendered by three back
// ends — plain text for the terminal and for diffs, one self-contained HTML file (inline
// <style> and inline SVG; no scripts, fonts, images or links fetched from anywhere), and JSON.
//
// Why a model: the three outputs must say the same thing of the same number. Every number a
// person reads is formatted once, in BuildReportModel, through engine/number_format.h; a cell
// keeps that text beside the full-precision number, and the back ends only lay it out. The
// JSON back end writes both.
//
// Sections, in order: (an integrity warning when the audit's digests do not hold and the
// caller allowed it), summary, cautions, the plan in words, data and row accounting, the route
// (table and chart; for partial F each step's F and p and a −log10(p) chart), the candidates
// scored at each step, all subsets (audits with `subsets` only), the final model
// (coefficients, intervals, the APA F test, ANOVA), diagnostics (Cook's distance by line
// number, residuals against fitted values as a density, a histogram of standardised residuals
// with the normal curve, their quantiles against the normal's, the rows that stand out; or how
// to get them), validation (audits with a `validation` section: the k-fold error beside the
// residual SD, the holdout with its calibration chart, the bootstrap's inclusion and size
// charts, top models and coefficient intervals) and integrity.
//
// Size: the diagnostics arrive as a bounded summary (engine/diagnostics.h: counts, binned
// views, the kDiagnosticsTopRows largest rows by leverage, |Cook's distance| and |standardised
// residual|), and every chart and table is bounded by ReportOptions (bins, grid cells, caps), so
// neither the report nor the memory it takes grows with the rows diagnosed. Cost: O(audit)
// beyond the pass over the rows.
//
// Failure modes: a document that is not a stepledger audit, or whose sections have the wrong
// JSON types, throws InputError naming the JSON key; optional sections that are absent are
// skipped (or, for diagnostics, replaced by how to get them).

#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/engine/diagnostics.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/run/run_plan.h"

namespace stepledger {

/// The diagnostics of an audit's final model, for the report's diagnostics section.
struct ReportDiagnostics {
  /// ComputeDiagnostics of the final model over the rows it was fitted on (a bounded summary).
  DiagnosticsResult result;
  /// Coefficients of the final model, intercept included (the 2k/n leverage threshold).
  std::size_t k = 0;
  /// Residual standard deviation of the final model; undefined when n <= k.
  std::optional<double> sigma;
  /// A data set's file names in reading order (RowDiagnostic::file indexes them), so that rows
  /// are named "line 12 of b.csv"; empty for one file (SetFileNames, run/run_plan.h).
  std::vector<std::string> set_files;
};

struct ReportOptions {
  /// Heading of the report. Default (empty): "Selection report: " and the data file's name.
  std::string title;
  /// Most rows listed under "rows that stand out" (>= 0; they are taken from the diagnostics'
  /// largest-first lists); the count of all of them is always given, and `report --rows-out
  /// FILE` writes them all. Default 40.
  std::size_t max_outlier_rows = 40;
  /// Most levels listed per categorical column in the data section; the count is always given.
  /// Default 8.
  std::size_t max_levels_listed = 8;
  /// Chart width in SVG user units (the charts scale to the page width anyway; this sets the
  /// aspect ratio and the text size relative to the chart). Default 720, range [320, 2000].
  double chart_width = 720;
  /// Most line-number ranges of the Cook's distance chart (each shows its largest distance; the
  /// diagnostics' bins are merged in equal groups down to at most this many). Default 120,
  /// range [10, 1000].
  std::size_t cooks_bins = 120;
  /// Most cells of the residual-against-fitted density grid, across and down (the diagnostics'
  /// bins merged in equal groups over the range the rows occupy). Defaults 48 x 28, each in
  /// [4, 200].
  std::size_t density_columns = 48;
  std::size_t density_rows = 28;
  /// Most bins of the standardised-residual histogram (the diagnostics' bins of width 1/16
  /// merged in equal groups). Default 32, range [5, 200].
  std::size_t histogram_bins = 32;
  /// Most individual rows drawn on top of a diagnostics chart (from the diagnostics'
  /// largest-first lists); the count of those not drawn is stated. Default 200.
  std::size_t max_flagged_points = 200;
  /// Problems CheckAuditIntegrity found (empty: the digests hold). When not empty the caller
  /// chose to render anyway (`report --allow-unverified`): the report opens with a warning
  /// naming them, and the JSON carries `"verified": false`.
  std::vector<std::string> integrity_problems;
  /// Throws InputError naming the field when out of range.
  void Validate() const;
};

// ---- the model ---------------------------------------------------------------------------

/// What a value is, which fixes how it is formatted (engine/number_format.h) and aligned.
enum class ValueKind {
  kText,       ///< words, names, digests
  kCount,      ///< FormatCount: "1,923"
  kQuantity,   ///< FormatQuantity: money, sums of squares, criteria, estimates
  kStatistic,  ///< FormatStatistic: F, t with two decimals
  kPValue,     ///< FormatPValue: "0.0321", "< 0.0001"
  kPercent,    ///< FormatPercent: "12.5%"
  kCriterion,  ///< FormatCriterionValue: fixed decimals, as the route's rules print it
};
const char* ToString(ValueKind kind);

/// One value: the text people read, formatted once, and the number it came from.
struct ReportValue {
  ValueKind kind = ValueKind::kText;
  std::optional<double> number;  ///< full precision; nullopt for text and undefined numbers
  std::string text;

  static ReportValue Text(std::string text);
  static ReportValue Count(std::optional<std::int64_t> count);
  /// FormatQuantity with `significant` digits.
  static ReportValue Quantity(std::optional<double> value, int significant = 4);
  static ReportValue Statistic(std::optional<double> value);
  static ReportValue PValue(std::optional<double> value);
  static ReportValue Percent(std::optional<double> share);
  /// A criterion value as the route's rules print it (selection/criterion.h
  /// FormatCriterionValue); criterion is the plan's code ("bic", "adj-r2", ...).
  static ReportValue CriterionValue(std::string_view criterion, std::optional<double> value);
};

struct ReportFact {
  std::string label;
  ReportValue value;
};

/// Prose: one paragraph. style: "" (plain), "note" (secondary) or "warning" (shown first).
struct ReportParagraph {
  std::string text;
  std::string style;
};

/// A bulleted list; each item may carry a tag (a caution's kind).
struct ReportList {
  struct Item {
    std::string tag;
    std::string text;
  };
  std::string style;  ///< "" or "cautions"
  std::vector<Item> items;
};

struct ReportFacts {
  std::vector<ReportFact> facts;
};

struct ReportColumn {
  std::string heading;
  ValueKind kind = ValueKind::kText;  ///< numbers are right-aligned
};

struct ReportTable {
  std::string caption;  ///< may be empty
  std::vector<ReportColumn> columns;
  std::vector<std::vector<ReportValue>> rows;
  /// The HTML folds the table away (<details>) behind its caption; the text shows it.
  bool folded = false;
  /// Per row: "" or a state the HTML marks ("chosen", "ineligible").
  std::vector<std::string> row_styles;
  /// Rows left out by a cap (stated under the table).
  std::size_t rows_not_listed = 0;
};

/// What a chart draws; the HTML back end has one layout per kind.
enum class ChartKind {
  kLine,       ///< x–y points joined in order (route, subsets)
  kDotRows,    ///< one labelled row per point, the value on x (candidates)
  kIntervals,  ///< one row per point with its own scale, an interval [low, high] (coefficients)
  kScatter,    ///< x–y points, not joined (Cook's distance by line number)
  kDensity,    ///< a grid of binned counts shaded, points on top (residuals against fitted)
  kHistogram,  ///< bars of binned counts, a curve on top (residual histogram)
  kBars,       ///< one labelled row per point, a bar from 0 to the value on x (inclusion shares)
};

struct ChartPoint {
  double x = 0;
  double y = 0;
  std::string css_class;             ///< "route-point add", "candidate chosen", ...
  std::optional<std::string> title;  ///< hover text
  std::string label;                 ///< row label (kDotRows, kIntervals) or a point label
  std::optional<double> low, high;   ///< the interval (kIntervals)
  std::string value_text;            ///< the value as formatted for people (kIntervals)
  bool defined = true;               ///< false: no value (drawn as a cross on the axis)
};

struct ChartSeries {
  std::string name;
  bool joined = false;   ///< draw a line through the points in order
  bool markers = true;   ///< false: a curve only (the normal density)
  std::vector<ChartPoint> points;
  /// CSS class of the joined line; empty: the default ("route-line" with markers, else
  /// "normal-curve"). "ref" draws a dashed reference line (the calibration chart's identity).
  std::string line_class;
};

struct ReferenceLine {
  bool vertical = false;  ///< x = value; else y = value
  double value = 0;
  std::string label;
};

/// Binned counts on a regular grid (kDensity: columns x rows; kHistogram: one row).
struct ChartGrid {
  double x_lo = 0, x_hi = 1, y_lo = 0, y_hi = 1;
  std::size_t columns = 0, rows = 0;
  std::vector<std::uint64_t> counts;  ///< row-major from y_lo; size columns * rows
  std::uint64_t CountAt(std::size_t column, std::size_t row) const { return counts[row * columns + column]; }
};

struct ReportChart {
  std::string id;  ///< the <svg> class ("route-chart", "cooks-chart", ...)
  ChartKind kind = ChartKind::kLine;
  std::string title, x_label, y_label, caption;
  /// Room to keep visible on the y axis beyond the data (for example 0, or a threshold).
  std::vector<double> y_include, x_include;
  std::vector<ChartSeries> series;
  std::vector<ReferenceLine> references;
  std::optional<ChartGrid> grid;   ///< kDensity, kHistogram
  bool integer_x = false;          ///< x is a step number or model size
  bool rotate_point_labels = false;
};

using ReportBlock = std::variant<ReportParagraph, ReportList, ReportFacts, ReportTable, ReportChart>;

struct ReportSection {
  std::string id;     ///< anchor and JSON key ("summary", "route", ...)
  std::string title;
  std::vector<ReportBlock> blocks;  ///< in reading order
};

struct ReportModel {
  std::string title;
  std::string subtitle;  ///< "Audit created ... by ...; seal ..."
  /// True unless ReportOptions.integrity_problems was not empty.
  bool verified = true;
  /// When not verified: the warning every back end puts first (headline, then the problems).
  std::vector<std::string> integrity_warning;
  std::vector<ReportSection> sections;
  bool has_diagnostics = false;
  const ReportSection* Find(std::string_view id) const;
};

/// Builds the report once: reads the audit (and diagnostics, when given) and formats every
/// number. Deterministic for a given audit, diagnostics and options.
ReportModel BuildReportModel(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options = {});

// ---- back ends ---------------------------------------------------------------------------

/// Plain text: the same sections as terminal tables; charts are named, their data are in the
/// tables beside them and in the HTML.
std::string RenderTextReport(const ReportModel& model);
/// One self-contained HTML5 document.
std::string RenderHtmlReport(const ReportModel& model, double chart_width = 720);
/// The model as JSON (`report --json`): every value as {"text", "number", "kind"} with the
/// number at full precision, charts with their points and grids.
nlohmann::json RenderJsonReport(const ReportModel& model);

/// BuildReportModel, then the back end (what `select --out` and `report` call).
std::string RenderTextReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options = {});
std::string RenderHtmlReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options = {});

/// The CSV of the rows that stand out (`report --rows-out FILE`, the one report output with a
/// line per row): this header, then StandOutRowCsv for each such row in file order, written
/// while the rows are diagnosed (DiagnoseAuditRows).
inline constexpr std::string_view kStandOutCsvHeader =
    "line,fitted,residual,standardized_residual,leverage,cooks_distance,reasons\n";
/// The header for a data set of several files: the file's name first (each file's lines start
/// at 1 again).
inline constexpr std::string_view kStandOutSetCsvHeader =
    "file,line,fitted,residual,standardized_residual,leverage,cooks_distance,reasons\n";
/// One record of that CSV (ending in a newline): numbers at full precision (shortest round
/// trip), undefined ones empty, the reasons in words; for a data set (set_files not empty) the
/// file's name first.
std::string StandOutRowCsv(const RowDiagnostic& row, const StandOutThresholds& thresholds,
                           const std::vector<std::string>& set_files = {});

/// The diagnostics of an audit's final model on its data file or data set, for the report: checks that the
/// file's fingerprint equals the audit's data.sha256 (else InputError naming both digests and
/// the file), rebuilds the model (FittedModelFromAudit) and makes one pass over the rows with
/// the audit's recorded reader settings. audit_name (the audit's file name) starts messages.
/// The text is read once: the fingerprint and the typed spill come from the same scan, and no
/// row is used before the fingerprint has been checked.
/// stand_out_csv, when set, receives kStandOutCsvHeader and then, during the pass and in file
/// order, StandOutRowCsv of every row that stands out (nothing is kept per row).
ReportDiagnostics DiagnoseAuditRows(const nlohmann::json& audit,
                                    const DataSet& data,
                                    std::string_view audit_name,
                                    const std::function<void(std::string_view)>& stand_out_csv = {},
                                    const DataReadOptions& read_options = {});

/// The report's diagnostics from a run's own diagnostics pass (no second pass; with the set's
/// file names, SetFileNames); nullopt when the run made none.
std::optional<ReportDiagnostics> RunReportDiagnostics(const RunResult& run);

/// File name of the HTML report that `select --out DIR` writes beside the audit.
inline constexpr std::string_view kReportFileName = "report.html";

/// Writes DIR/audit.json (the sealed document) and DIR/report.html, rendered from that very
/// document with the run's own diagnostics (no second pass), as one unit (WriteAuditFolder):
/// what `select --out` and `rerun --out` write, and the Python module's `out=`.
void WriteAuditWithReport(const std::filesystem::path& folder, const nlohmann::json& sealed_document,
                          const RunResult& run, bool overwrite);

}  // namespace stepledger

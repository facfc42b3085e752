#pragma once
// The reviewer report of an audit (DESIGN.md §8): a plain-text rendering for the terminal and
// for diffs, and one self-contained HTML file (inline <style> and inline SVG charts; no
// scripts, fonts, images or links fetched from anywhere) for reviewers.
//
// Both render from the parsed audit alone (ReadAuditFile) plus, optionally, the per-row
// diagnostics of its final model (one more pass over the data): never from a second source of
// truth. Sections, in order:
//   summary and cautions (always, near the top), the plan in words, data and row accounting,
//   the route (table and criterion-by-step chart), the candidates scored at each step (dot
//   charts), all subsets (best criterion by model size; audits with `subsets` only), the final
//   model (coefficients, intervals, ANOVA), diagnostics (residuals vs fitted, normal quantile
//   plot, leverage vs standardised residual with Cook's distance contours, the rows that stand
//   out; or how to get them), validation and stability (only when the audit has those keys,
//   rendered generically), and the integrity block (seal, signature, parent, tool).
//
// Every text taken from the audit is HTML-escaped. Each chart's data points carry the class
// "pt" and one of route-point, candidate, subset-best, coef, resid, qq, lev (tests count them).
// Cost: O(size of the audit + rows of the diagnostics); the HTML grows by about 150 bytes per
// diagnosed row (three charts).
//
// Failure modes: a document that is not a stepledger audit, or whose sections have the wrong
// JSON types, throws InputError naming the JSON key; optional sections that are absent are
// skipped (or, for diagnostics, replaced by how to get them).

#include <cstddef>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/engine/fit.h"

namespace stepledger {

/// Per-row diagnostics of an audit's final model, for the report's diagnostics section.
struct ReportDiagnostics {
  /// ComputeDiagnostics of the final model over the rows it was fitted on (file order).
  DiagnosticsResult result;
  /// Coefficients of the final model, intercept included (Cook's contours, 2k/n threshold).
  std::size_t k = 0;
  /// Residual standard deviation of the final model; undefined when n <= k.
  std::optional<double> sigma;
};

struct ReportOptions {
  /// Heading of the report. Default (empty): "Selection report: " and the data file's name.
  std::string title;
  /// Most rows listed under "rows that stand out" (>= 0); the count of all of them is always
  /// given. Default 40.
  std::size_t max_outlier_rows = 40;
  /// Most levels listed per categorical column in the data section; the count is always given.
  /// Default 8.
  std::size_t max_levels_listed = 8;
  /// Chart width in SVG user units (the charts scale to the page width anyway; this sets the
  /// aspect ratio and the text size relative to the chart). Default 720, range [320, 2000].
  double chart_width = 720;
  /// Throws InputError naming the field when out of range.
  void Validate() const;
};

/// The report as plain text: the same sections as the HTML, as terminal tables (charts are
/// summarised by their tables). Deterministic for a given audit and diagnostics.
std::string RenderTextReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options = {});

/// The report as one self-contained HTML5 document. Deterministic for a given audit and
/// diagnostics.
std::string RenderHtmlReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options = {});

/// The diagnostics of an audit's final model on its data file, for the report: checks that the
/// file's fingerprint equals the audit's data.sha256 (else InputError naming both digests and
/// the file), rebuilds the model (FittedModelFromAudit) and makes one pass over the rows with
/// the audit's recorded reader settings. audit_name (the audit's file name) starts messages.
ReportDiagnostics DiagnoseAuditRows(const nlohmann::json& audit,
                                    const std::filesystem::path& data,
                                    std::string_view audit_name);

/// File name of the HTML report that `select --out DIR` writes beside the audit.
inline constexpr std::string_view kReportFileName = "report.html";

}  // namespace stepledger

// `stepledger fit DATA --plan PLAN`: fits every term of the plan, no selection.

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <numeric>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/run/cautions.h"
#include "stepledger/run/run_plan.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/profile.h"

namespace stepledger::cli {
namespace {

struct FitArgs {
  std::vector<std::string> data;  ///< one file, several files or one folder (engine/data_set.h)
  std::string plan;
  double confidence_level = 0.95;
  int refinement_passes = 10;
  /// VIF above which a coefficient is named in the cautions (common practice: 10).
  double vif_caution = 10;
};

/// Where a row is: its line, and its file of a data set (RowDiagnostic::file).
struct RowPlace {
  std::uint64_t line = 0;
  std::size_t file = 0;
};

struct DiagnosticsSummary {
  std::optional<double> max_leverage, max_cooks_distance, press;
  RowPlace max_leverage_at, max_cooks_at;
  std::uint64_t large_residuals = 0;  ///< rows with |standardized residual| > 3
  std::vector<RowPlace> large_residuals_at;  ///< where the largest few are
};

DiagnosticsSummary Summarize(const DiagnosticsResult& diagnostics) {
  DiagnosticsSummary summary;
  summary.press = diagnostics.press;
  if (diagnostics.rows > 0) {
    summary.max_leverage = diagnostics.max_leverage;
    summary.max_leverage_at = {diagnostics.max_leverage_line, diagnostics.max_leverage_file};
  }
  // The lists put undefined values (leverage 1) first: the first defined one is the largest.
  for (const RowDiagnostic& row : diagnostics.largest_cooks_distance) {
    if (!row.cooks_distance) continue;
    summary.max_cooks_distance = row.cooks_distance;
    summary.max_cooks_at = {row.line, row.file};
    break;
  }
  summary.large_residuals = diagnostics.standardized_residual_above;
  for (const RowDiagnostic& row : diagnostics.largest_standardized_residual) {
    if (summary.large_residuals_at.size() == 5) break;
    if (diagnostics.thresholds.StandardizedResidualAbove(row)) summary.large_residuals_at.push_back({row.line, row.file});
  }
  return summary;
}

std::string RowsText(const RowAccounting& accounting) {
  std::ostringstream text;
  text << "Rows: " << accounting.rows_read << " read, " << accounting.rows_used << " used, ";
  if (accounting.rows_held_out > 0) text << accounting.rows_held_out << " held out, ";
  text << accounting.RowsDroppedTotal() << " dropped";
  if (!accounting.rows_dropped.empty()) {
    text << " (";
    bool first = true;
    for (const RowDrop& entry : accounting.rows_dropped) {
      text << (first ? "" : ", ") << ToString(entry.reason) << " in " << entry.column << ": " << entry.rows;
      first = false;
    }
    text << ")";
  }
  text << "\n";
  return text.str();
}

// set_files: SetFileNames(run); a data set's rows are named with their file.
std::string DiagnosticsText(const DiagnosticsSummary& summary, const FitResult& fit,
                            const std::vector<std::string>& set_files) {
  const auto place = [&](const RowPlace& at) { return RowPlaceText(at.line, at.file, set_files); };
  std::ostringstream text;
  text << "Diagnostics:\n";
  if (summary.max_leverage) {
    text << "  largest leverage         " << FormatQuantity(summary.max_leverage) << " ("
         << place(summary.max_leverage_at) << "; average k/n = "
         << FormatQuantity(fit.n > 0 ? static_cast<double>(fit.k) / static_cast<double>(fit.n) : 0.0)
         << ")\n";
  }
  if (summary.max_cooks_distance) {
    text << "  largest Cook's distance  " << FormatQuantity(summary.max_cooks_distance)
         << " (" << place(summary.max_cooks_at) << ")\n";
  }
  text << "  PRESS                    "
       << (summary.press ? FormatQuantity(summary.press) : std::string("undefined (some leverage is 1)"))
       << " (RSS " << FormatQuantity(fit.rss) << ")\n";
  text << "  |standardized residual| > 3: " << summary.large_residuals << " rows";
  if (!summary.large_residuals_at.empty()) {
    // One file: "lines 3, 17"; a data set: "line 3 of a.csv, line 17 of c.csv".
    text << " (largest at " << (set_files.empty() ? "lines " : "");
    for (std::size_t i = 0; i < summary.large_residuals_at.size(); ++i) {
      const RowPlace& at = summary.large_residuals_at[i];
      text << (i > 0 ? ", " : "") << (set_files.empty() ? std::to_string(at.line) : place(at));
    }
    if (summary.large_residuals > summary.large_residuals_at.size()) text << ", ...";
    text << ")";
  }
  text << "\n";
  return text.str();
}

// {value, line}, and the file's name for a data set (set_files: SetFileNames(run)).
nlohmann::json NullableLine(const std::optional<double>& value, const RowPlace& at,
                            const std::vector<std::string>& set_files) {
  if (!value) return nullptr;
  nlohmann::json json{{"value", NumberOrNull(value)}, {"line", at.line}};
  if (!set_files.empty() && at.file < set_files.size()) json["file"] = set_files[at.file];
  return json;
}

int RunFit(const FitArgs& args, CommandContext& context) {
  auto& log = *context.log;
  // fit is a run of the plan with method "none": every eligible term, no selection, the same
  // pipeline (profile, factor pass, refined fit, diagnostics, cautions) as select, no audit.
  LoadedPlan loaded = LoadPlanFile(args.plan, context.common.limits);
  loaded.plan.search.method = Method::kNone;
  RunOptions options;
  options.csv = MakeCsvOptions(context.common);
  options.threads = context.common.threads;
  options.work_dir = context.common.work_dir;
  options.limits = context.common.limits;
  options.shares = context.shares;
  options.fit.confidence_level = args.confidence_level;
  options.fit.max_refinement_passes = args.refinement_passes;
  options.vif_caution = args.vif_caution;
  log.info("fitting the plan {} on {}", args.plan, DataInputsText(args.data));
  const RunResult run = RunPlan(MakeDataSet(args.data), loaded, options);
  for (const auto& [term, reason] : run.design.skipped) log.warn("term '{}' skipped: {}", term, reason);
  const FitResult& fit = run.fit;
  log.info("fit: {} refinement passes, last correction {:.3g}, stopped: {}", fit.refinement_passes,
           fit.refinement_correction, ToString(fit.refinement_stop));

  const DiagnosticsSummary summary =
      run.diagnostics ? Summarize(*run.diagnostics) : DiagnosticsSummary{};
  const std::vector<Caution> cautions = ComputeCautions(run);

  if (context.common.json) {
    nlohmann::json result = ModelToJson(fit);
    // The ranges a prediction must stay within: the extrapolation caution's, over the rows used.
    nlohmann::json column_ranges = nlohmann::json::array();
    for (const Caution& caution : cautions) {
      if (caution.kind != CautionKind::kExtrapolation) continue;
      for (const QuotedRange& range : caution.ranges) {
        column_ranges.push_back({{"column", range.column}, {"min", range.min}, {"max", range.max}});
      }
    }
    result["data"] = {{"file", DataInputsText(args.data)},
                      {"rows_read", run.accounting.rows_read},
                      {"rows_used", run.accounting.rows_used},
                      {"rows_dropped", RowsDroppedJson(run.accounting)},
                      {"ranges", std::move(column_ranges)}};
    result["diagnostics"] = {
        {"max_leverage", NullableLine(summary.max_leverage, summary.max_leverage_at, SetFileNames(run))},
        {"max_cooks_distance", NullableLine(summary.max_cooks_distance, summary.max_cooks_at, SetFileNames(run))},
        {"press", NumberOrNull(summary.press)},
        {"large_standardized_residuals", summary.large_residuals}};
    if (run.plan.plan.search.holdout) result["data"]["rows_held_out"] = run.accounting.rows_held_out;
    if (run.data_is_set) result["data"]["files"] = DataFilesJson(run.data_files);
    result["cautions"] = CautionsToJson(cautions);
    result["validation"] = ValidationToJson(run.validation);
    result["model_statement"] = ModelStatement(run.design, fit);
    context.out << JsonText(result) << "\n";
    return 0;
  }

  context.out << DataSetFilesText(run) << "Model: " << ModelStatement(run.design, fit) << "\n" << fit.FullReport() << "\n"
              << ValidationSummaryText(run.validation, fit.criteria.sigma) << "\n" << RowsText(run.accounting);
  if (const std::string detail = ValidationDetailText(run.validation); !detail.empty()) {
    context.out << "\n" << detail;
  }
  if (!context.common.quiet) {
    context.out << "\n" << DiagnosticsText(summary, fit, SetFileNames(run)) << "\nCautions:\n";
    for (const Caution& caution : cautions) context.out << "  - " << caution.message << "\n";
  }
  return 0;
}

}  // namespace

void AddFitCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<FitArgs>();
  CLI::App* command = app.add_subcommand(
      "fit", "Fit every term of a plan, with no selection, and show the model");
  command->add_option("DATA", args->data, kDataInputHelp)
      ->required()
      ->expected(1, -1)
      ->check(kExistingDataInput);
  command->add_option("--plan", args->plan, "Plan file (JSON): response and terms")
      ->required()
      ->check(kExistingInputFile)
      ->type_name("PLAN");
  command->add_option("--level", args->confidence_level, "Confidence level of the intervals")
      ->check(CLI::Range(0.5, 0.999999))
      ->type_name("P");
  command->add_option("--refine", args->refinement_passes,
                      "Largest number of refinement passes over the rows (0: factor only)")
      ->check(CLI::Range(0, 100))
      ->type_name("N");
  AddCommonOptions(*command, context.common, kAllCommonOptions & ~kForceOption);
  command->footer(
      std::string(kDataSetHelp) +
      "One streaming pass builds the triangular factor of the plan's design, the fit is refined "
      "against the rows, and one more pass gives the per-row diagnostics. Prints the "
      "coefficients (estimate, SE, t, p, confidence interval, VIF), the sequential analysis of "
      "variance, the criteria (R-squared, adjusted R-squared, log-likelihood, AIC, AICc, BIC), "
      "the rows read, used and dropped by reason, the largest leverage and Cook's distance "
      "with their line numbers, PRESS, and the cautions that apply. With --json: the model "
      "object of the contract, plus model_statement, data, diagnostics, cautions and validation.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n  " +
      ProgramWord() + " fit build/demo/laptops.csv --plan build/demo/plan.json");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunFit(*args, context); };
  });
}

}  // namespace stepledger::cli

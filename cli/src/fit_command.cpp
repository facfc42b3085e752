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
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/plan_file.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/profile.h"

namespace stepledger::cli {
namespace {

struct FitArgs {
  std::string data;
  std::string plan;
  double confidence_level = 0.95;
  int refinement_passes = 10;
  /// VIF above which a coefficient is named in the cautions (common practice: 10).
  double vif_caution = 10;
};

std::string Format(double value, const char* format = "%.6g") {
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, format, value);
  return buffer;
}

struct DiagnosticsSummary {
  std::optional<double> max_leverage, max_cooks_distance, press;
  std::uint64_t max_leverage_line = 0, max_cooks_line = 0;
  std::uint64_t large_residuals = 0;  ///< rows with |standardized residual| > 3
  std::vector<std::uint64_t> large_residual_lines;  ///< the first few
};

DiagnosticsSummary Summarize(const DiagnosticsResult& diagnostics) {
  DiagnosticsSummary summary;
  summary.press = diagnostics.press;
  for (const RowDiagnostic& row : diagnostics.rows) {
    if (!summary.max_leverage || row.leverage > *summary.max_leverage) {
      summary.max_leverage = row.leverage;
      summary.max_leverage_line = row.line;
    }
    if (row.cooks_distance &&
        (!summary.max_cooks_distance || *row.cooks_distance > *summary.max_cooks_distance)) {
      summary.max_cooks_distance = row.cooks_distance;
      summary.max_cooks_line = row.line;
    }
    if (row.standardized_residual && std::fabs(*row.standardized_residual) > 3) {
      ++summary.large_residuals;
      if (summary.large_residual_lines.size() < 5) summary.large_residual_lines.push_back(row.line);
    }
  }
  return summary;
}

// Range of each source column behind a numeric, power or log term: predictions outside
// these are extrapolations.
struct ColumnRange {
  std::string column;
  double min = 0, max = 0;
};

std::vector<ColumnRange> SourceRanges(const Design& design, const DataProfile& profile) {
  std::vector<ColumnRange> ranges;
  for (const DesignTerm& term : design.terms) {
    if (term.kind != TermKind::kNumeric && term.kind != TermKind::kPower &&
        term.kind != TermKind::kLog) {
      continue;
    }
    const bool seen = std::any_of(ranges.begin(), ranges.end(), [&](const ColumnRange& range) {
      return range.column == term.source_column;
    });
    if (seen) continue;
    if (const ColumnProfile* column = profile.Find(term.source_column)) {
      // Profile ranges cover every present cell; the used rows lie inside them.
      ranges.push_back({column->name, column->min, column->max});
    }
  }
  return ranges;
}

std::vector<std::string> Cautions(const FitResult& fit, const DiagnosticsSummary& diagnostics,
                                  const std::vector<ColumnRange>& ranges, const FitArgs& args) {
  std::vector<std::string> cautions;
  cautions.push_back(
      "A coefficient is an association in these data, not a cause. In pricing, protected "
      "characteristics and their proxies must not be used; local law and professional "
      "standards govern.");
  std::string extrapolation =
      "Predictions for rows outside the ranges of these data";
  if (!ranges.empty()) {
    extrapolation += " (";
    for (std::size_t i = 0; i < ranges.size(); ++i) {
      if (i > 0) extrapolation += ", ";
      extrapolation += ranges[i].column + " " + Format(ranges[i].min) + " to " +
                       Format(ranges[i].max);
    }
    extrapolation += ")";
  }
  if (diagnostics.max_leverage) {
    extrapolation += " or with leverage above " + Format(*diagnostics.max_leverage, "%.4g") +
                     " (the largest here)";
  }
  extrapolation += " are extrapolations.";
  cautions.push_back(extrapolation);

  std::string high_vif;
  for (const CoefficientEstimate& coefficient : fit.coefficients) {
    if (coefficient.vif && *coefficient.vif > args.vif_caution) {
      if (!high_vif.empty()) high_vif += ", ";
      high_vif += coefficient.name + " (" + Format(*coefficient.vif, "%.4g") + ")";
    }
  }
  if (!high_vif.empty()) {
    cautions.push_back("VIF above " + Format(args.vif_caution) + ": " + high_vif +
                       "; these estimates are unstable under collinearity and their standard "
                       "errors are inflated.");
  }
  if (!fit.aliased_columns.empty()) {
    std::string names;
    for (const std::string& name : fit.aliased_columns) names += (names.empty() ? "" : ", ") + name;
    cautions.push_back("Aliased with earlier columns and not estimated: " + names + ".");
  }
  if (fit.status == FitStatus::kNoResidualDf) {
    cautions.push_back("No residual degrees of freedom (n <= k): no standard errors or tests.");
  }
  return cautions;
}

std::string RowsText(const RowAccounting& accounting) {
  std::uint64_t dropped = 0;
  for (const auto& [reason, count] : accounting.rows_dropped) dropped += count;
  std::ostringstream text;
  text << "Rows: " << accounting.rows_read << " read, " << accounting.rows_used << " used, "
       << dropped << " dropped";
  if (!accounting.rows_dropped.empty()) {
    text << " (";
    bool first = true;
    for (const auto& [reason, count] : accounting.rows_dropped) {
      text << (first ? "" : ", ") << reason << ": " << count;
      first = false;
    }
    text << ")";
  }
  text << "\n";
  return text.str();
}

std::string DiagnosticsText(const DiagnosticsSummary& summary, const FitResult& fit) {
  std::ostringstream text;
  text << "Diagnostics:\n";
  if (summary.max_leverage) {
    text << "  largest leverage         " << Format(*summary.max_leverage, "%.4g") << " (line "
         << summary.max_leverage_line << "; average k/n = "
         << Format(fit.n > 0 ? static_cast<double>(fit.k) / static_cast<double>(fit.n) : 0.0,
                   "%.4g")
         << ")\n";
  }
  if (summary.max_cooks_distance) {
    text << "  largest Cook's distance  " << Format(*summary.max_cooks_distance, "%.4g")
         << " (line " << summary.max_cooks_line << ")\n";
  }
  text << "  PRESS                    "
       << (summary.press ? Format(*summary.press) : std::string("undefined (some leverage is 1)"))
       << " (RSS " << Format(fit.rss) << ")\n";
  text << "  |standardized residual| > 3: " << summary.large_residuals << " rows";
  if (!summary.large_residual_lines.empty()) {
    text << " (lines ";
    for (std::size_t i = 0; i < summary.large_residual_lines.size(); ++i) {
      text << (i > 0 ? ", " : "") << summary.large_residual_lines[i];
    }
    if (summary.large_residuals > summary.large_residual_lines.size()) text << ", ...";
    text << ")";
  }
  text << "\n";
  return text.str();
}

nlohmann::json NullableLine(const std::optional<double>& value, std::uint64_t line) {
  if (!value) return nullptr;
  return nlohmann::json{{"value", NumberOrNull(value)}, {"line", line}};
}

int RunFit(const FitArgs& args, CommandContext& context) {
  auto& log = *context.log;
  const LoadedPlan loaded = LoadPlanFile(args.plan);
  const Plan& plan = loaded.plan;

  CsvOptions csv = MakeCsvOptions(context.common);
  csv.missing_tokens = plan.missing_tokens;

  log.info("profiling {}", args.data);
  const DataProfile profile = ProfileCsv(args.data, csv);
  const Design design = BuildDesign(plan.design, profile);
  for (const auto& [term, reason] : design.skipped) log.warn("term '{}' skipped: {}", term, reason);

  PassOptions pass_options;
  pass_options.csv = csv;
  pass_options.threads = context.common.threads;
  log.info("factor pass over {} ({} design columns)", args.data, design.column_count());
  const PassResult pass = RunFactorPass(args.data, design, pass_options);

  std::vector<std::size_t> all_terms(design.terms.size());
  std::iota(all_terms.begin(), all_terms.end(), std::size_t{0});
  FitOptions fit_options;
  fit_options.confidence_level = args.confidence_level;
  fit_options.max_refinement_passes = args.refinement_passes;
  fit_options.Validate();
  const RowReplay replay = FileRowReplay(args.data, design, csv);
  const FitResult fit = FitModel(pass.factor, design, all_terms, fit_options, &replay);
  log.info("fit: {} refinement passes, last correction {:.3g}", fit.refinement_passes,
           fit.refinement_correction);

  const DiagnosticsResult diagnostics = ComputeDiagnostics(fit, design, replay);
  const DiagnosticsSummary summary = Summarize(diagnostics);
  const std::vector<ColumnRange> ranges = SourceRanges(design, profile);
  const std::vector<std::string> cautions = Cautions(fit, summary, ranges, args);

  if (context.common.json) {
    nlohmann::json result = ModelToJson(fit);
    nlohmann::json dropped = nlohmann::json::object();
    for (const auto& [reason, count] : pass.accounting.rows_dropped) dropped[reason] = count;
    nlohmann::json column_ranges = nlohmann::json::array();
    for (const ColumnRange& range : ranges) {
      column_ranges.push_back({{"column", range.column}, {"min", range.min}, {"max", range.max}});
    }
    result["data"] = {{"file", args.data},
                      {"rows_read", pass.accounting.rows_read},
                      {"rows_used", pass.accounting.rows_used},
                      {"rows_dropped", std::move(dropped)},
                      {"ranges", std::move(column_ranges)}};
    result["diagnostics"] = {
        {"max_leverage", NullableLine(summary.max_leverage, summary.max_leverage_line)},
        {"max_cooks_distance", NullableLine(summary.max_cooks_distance, summary.max_cooks_line)},
        {"press", NumberOrNull(summary.press)},
        {"large_standardized_residuals", summary.large_residuals}};
    result["cautions"] = cautions;
    result["model_statement"] = ModelStatement(design, fit);
    context.out << result.dump(2) << "\n";
    return 0;
  }

  context.out << "Model: " << ModelStatement(design, fit) << "\n" << fit.FullReport() << "\n" << RowsText(pass.accounting);
  if (!context.common.quiet) {
    context.out << "\n" << DiagnosticsText(summary, fit) << "\nCautions:\n";
    for (const std::string& caution : cautions) context.out << "  - " << caution << "\n";
  }
  return 0;
}

}  // namespace

void AddFitCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<FitArgs>();
  CLI::App* command = app.add_subcommand(
      "fit", "Fit every term of a plan, with no selection, and show the model");
  command->add_option("DATA", args->data, "CSV data file (header row first)")
      ->required()
      ->check(CLI::ExistingFile);
  command->add_option("--plan", args->plan, "Plan file (JSON): response and terms")
      ->required()
      ->check(CLI::ExistingFile)
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
      "One streaming pass builds the triangular factor of the plan's design, the fit is refined "
      "against the rows, and one more pass gives the per-row diagnostics. Prints the "
      "coefficients (estimate, SE, t, p, confidence interval, VIF), the sequential analysis of "
      "variance, the criteria (R-squared, adjusted R-squared, log-likelihood, AIC, AICc, BIC), "
      "the rows read, used and dropped by reason, the largest leverage and Cook's distance "
      "with their line numbers, PRESS, and the cautions that apply. With --json: the model "
      "object of the contract, plus model_statement, data, diagnostics and cautions.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n  " +
      ProgramWord() + " fit build/demo/laptops.csv --plan build/demo/plan.json");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunFit(*args, context); };
  });
}

}  // namespace stepledger::cli

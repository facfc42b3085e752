// `stepledger select DATA --plan PLAN [--out DIR]` and the quick form
// `stepledger select DATA --response COL [--method M] [--criterion C]`: runs the selection,
// prints the route, the final model as `fit` prints it, and the cautions.

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/audit/atomic_file.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/plan_file.h"
#include "stepledger/audit/route_json.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/profile.h"
#include "stepledger/selection/search.h"

namespace stepledger::cli {
namespace {

struct SelectArgs {
  std::string data;
  std::string plan;
  std::string response;
  std::string method;
  std::string criterion;
  std::string out_dir;
  std::string sign_key;  ///< --sign-key: Ed25519 private key (PEM) signing the audit
  int refinement_passes = 10;
};

std::string Format(double value, const char* format = "%.4g") {
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, format, value);
  return buffer;
}

/// One line on stderr per step, only when stderr is a terminal.
class ProgressLine : public SearchObserver {
 public:
  explicit ProgressLine(std::ostream& err) : err_(err) {}
  void OnDecision(const DecisionEvent& event) override {
    err_ << "\rselect: step " << event.step_index << ", " << ToString(event.action) << " "
         << event.term << "          " << std::flush;
  }
  void OnStop(const StopEvent& /*event*/) override { err_ << "\r" << std::string(60, ' ') << "\r" << std::flush; }

 private:
  std::ostream& err_;
};

std::vector<std::string> SelectionCautions(const FitResult& fit) {
  std::vector<std::string> cautions;
  cautions.push_back(
      "The p-values, standard errors and intervals of a selected model ignore the selection and "
      "are optimistic; judge the model on held-out data or by cross-validation.");
  std::optional<double> largest_vif;
  std::string largest_name;
  for (const CoefficientEstimate& coefficient : fit.coefficients) {
    if (coefficient.vif && (!largest_vif || *coefficient.vif > *largest_vif)) {
      largest_vif = coefficient.vif;
      largest_name = coefficient.name;
    }
  }
  std::string route = "With correlated predictors the route is unstable: terms can trade places "
                      "on slightly different data";
  if (largest_vif) {
    route += " (largest VIF in the final model: " + largest_name + ", " + Format(*largest_vif) + ")";
  }
  cautions.push_back(route + ".");
  cautions.push_back(
      "A selected term is an association in these data, not a cause. In pricing, protected "
      "characteristics and their proxies must not be used; local law and professional "
      "standards govern.");
  return cautions;
}

int RunSelect(const SelectArgs& args, CommandContext& context) {
  auto& log = *context.log;
  const auto started = std::chrono::steady_clock::now();
  if (args.plan.empty() == args.response.empty()) {
    throw InputError("select: give either --plan PLAN or --response COL (exactly one)");
  }
  Plan plan;
  std::string plan_verbatim;  // for the audit; empty when the command line shapes the plan
  if (!args.plan.empty()) {
    LoadedPlan loaded = LoadPlanFile(args.plan);
    plan = std::move(loaded.plan);
    if (args.method.empty() && args.criterion.empty()) plan_verbatim = std::move(loaded.verbatim);
  } else {
    plan = MakeQuickPlan(args.response);
  }
  if (!args.method.empty()) {
    const auto method = MethodFromString(args.method);
    if (!method) {
      throw InputError("--method: unknown method '" + QuoteForMessage(args.method) +
                       "'; use forward, backward, stepwise, all-subsets or none");
    }
    plan.search.method = *method;
  }
  if (!args.criterion.empty()) {
    const auto criterion = CriterionFromString(args.criterion);
    if (!criterion) {
      throw InputError("--criterion: unknown criterion '" + QuoteForMessage(args.criterion) +
                       "'; use adj-r2, aic, aicc, bic, cp, partial-f or cv");
    }
    plan.search.criterion = *criterion;
  }

  CsvOptions csv = MakeCsvOptions(context.common);
  csv.missing_tokens = plan.missing_tokens;
  log.info("profiling {}", args.data);
  const DataProfile profile = ProfileCsv(args.data, csv);
  const Design design = BuildDesign(plan.design, profile);
  for (const auto& [term, reason] : design.skipped) log.warn("term '{}' skipped: {}", term, reason);
  CheckPlanAgainstDesign(plan, design);
  ValidateSearchOptions(plan.search, design);

  PassOptions pass_options;
  pass_options.csv = csv;
  pass_options.threads = context.common.threads;
  DataFingerprint fingerprint;  // over the exact bytes the pass reads, for the audit
  const PassResult pass = RunFactorPass(args.data, design, pass_options,
                                        [&fingerprint](std::string_view bytes) { fingerprint.Update(bytes); });
  const std::uint64_t data_bytes = fingerprint.total_bytes();
  const std::string data_sha256 = fingerprint.Finish();

  ProgressLine progress(context.err);
  const bool show_progress = !context.common.quiet && isatty(STDERR_FILENO) != 0;
  const SearchResult result =
      RunSearch(pass.factor, design, plan.search, show_progress ? &progress : nullptr);
  log.info("search: {} ({} steps)", ToString(result.outcome), result.steps.size());

  FitOptions fit_options;
  fit_options.cp_sigma2 = result.cp_sigma2;
  fit_options.max_refinement_passes = args.refinement_passes;
  fit_options.Validate();
  const RowReplay replay = FileRowReplay(args.data, design, csv);
  const FitResult fit = FitModel(pass.factor, design, result.final_term_indices, fit_options, &replay);
  const std::vector<std::string> cautions = SelectionCautions(fit);

  nlohmann::json document = RouteToJson(result);
  document["search"] = SearchSummaryToJson(result);
  document["model"] = ModelToJson(fit);
  document["cautions"] = cautions;
  document["data"] = {{"file", args.data},
                      {"rows_read", pass.accounting.rows_read},
                      {"rows_used", pass.accounting.rows_used}};

  if (!args.out_dir.empty()) {
    SelectionForAudit selection;
    selection.data = args.data;
    selection.plan = &plan;
    selection.plan_verbatim = plan_verbatim;
    selection.profile = &profile;
    selection.design = &design;
    selection.accounting = &pass.accounting;
    selection.search = &result;
    selection.fit = &fit;
    selection.data_sha256 = data_sha256;
    selection.data_bytes = data_bytes;
    selection.options.csv = csv;
    selection.options.threads = context.common.threads;
    selection.options.fit = fit_options;
    selection.duration_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
    const auto written = WriteAuditForSelection(
        selection, AuditOutputOptions{args.out_dir, context.common.force, args.sign_key});
    log.info("wrote {}", written.string());
  }

  if (context.common.json) {
    context.out << document.dump(2) << "\n";
    return 0;
  }
  context.out << result.FullReport() << "\nFinal model\n" << fit.FullReport();
  if (!context.common.quiet) {
    context.out << "\nCautions:\n";
    for (const std::string& caution : cautions) context.out << "  - " << caution << "\n";
  }
  return 0;
}

}  // namespace

void AddSelectCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<SelectArgs>();
  CLI::App* command = app.add_subcommand(
      "select", "Choose the terms of a linear model and show every step of the route");
  command->add_option("DATA", args->data, "CSV data file (header row first)")
      ->required()
      ->check(CLI::ExistingFile);
  command->add_option("--plan", args->plan, "Plan file (JSON): response, terms, method, criterion")
      ->check(CLI::ExistingFile)
      ->type_name("PLAN");
  command->add_option("--response", args->response,
                      "Quick form: the response column; every other column is a candidate term")
      ->type_name("COL");
  command->add_option("--method", args->method,
                      "forward, backward, stepwise, all-subsets or none (overrides the plan)")
      ->type_name("M");
  command->add_option("--criterion", args->criterion,
                      "adj-r2, aic, aicc, bic, cp, partial-f or cv (overrides the plan)")
      ->type_name("C");
  command->add_option("--out", args->out_dir, "Folder for the audit file audit.json (written atomically)")
      ->type_name("DIR");
  command->add_option("--sign-key", args->sign_key, "Ed25519 private key (PEM) to sign the audit with")
      ->check(CLI::ExistingFile)
      ->type_name("FILE");
  command->add_option("--refine", args->refinement_passes,
                      "Largest number of refinement passes of the final fit (0: factor only)")
      ->check(CLI::Range(0, 100))
      ->type_name("N");
  AddCommonOptions(*command, context.common);
  command->footer(
      "One streaming pass builds the factor of every candidate column; the search then works on "
      "the factor alone. Prints the route (step, action, term, criterion before -> after, the "
      "rule that decided), the final model as `fit` prints it, and the cautions. With --json: "
      "{steps, subsets (all-subsets), search, model, cautions, data}.\n\n"
      "Examples:\n  stepledger select examples/data/laptops.csv --plan examples/plans/laptops.json\n"
      "  stepledger select examples/data/laptops.csv --response resale_price --method forward "
      "--criterion bic");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunSelect(*args, context); };
  });
}

}  // namespace stepledger::cli

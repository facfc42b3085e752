// `stepledger select DATA --plan PLAN [--out DIR]` and the quick form
// `stepledger select DATA --response COL [--method M] [--criterion C]`: runs the selection,
// prints the route, the final model as `fit` prints it, and the cautions.

#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/report/report.h"
#include "stepledger/audit/route_json.h"
#include "stepledger/audit/signature.h"
#include "stepledger/run/cautions.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
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

// Writes DIR/audit.json and DIR/report.html as one unit. The audit document is built and sealed
// once; the report is rendered from that very document (with the diagnostics of the final model
// that the run's diagnostics pass computed) before anything is written.
void WriteAuditAndReport(const SelectArgs& args, const RunResult& run, CommandContext& context) {
  AuditDocumentOptions document_options;
  const nlohmann::json document = BuildSealedAudit(run, document_options, args.sign_key);
  std::optional<ReportDiagnostics> diagnostics;
  if (run.diagnostics) diagnostics = ReportDiagnostics{*run.diagnostics, run.fit.k, run.fit.criteria.sigma};
  std::string report = RenderHtmlReport(document, diagnostics ? &*diagnostics : nullptr);
  WriteAuditFolder(args.out_dir, document, {{std::string(kReportFileName), std::move(report)}},
                   context.common.force);
  const std::filesystem::path folder = args.out_dir;
  context.log->info("wrote {} (seal {}) and {}", (folder / kAuditFileName).string(),
                    document.value("seal", ""), (folder / kReportFileName).string());
}

int RunSelect(const SelectArgs& args, CommandContext& context) {
  auto& log = *context.log;
  if (args.plan.empty() == args.response.empty()) {
    throw InputError("select: give either --plan PLAN or --response COL (exactly one)");
  }
  LoadedPlan loaded;
  if (!args.plan.empty()) {
    loaded = LoadPlanFile(args.plan);
  } else {
    loaded.plan = MakeQuickPlan(args.response);
  }
  // The audit records the plan file's text, or, when the command line shapes the plan, the
  // normalised plan, so that a replay runs what was run.
  const bool shaped_by_command_line =
      args.plan.empty() || !args.method.empty() || !args.criterion.empty();
  if (!args.method.empty()) {
    const auto method = MethodFromString(args.method);
    if (!method) {
      throw InputError("--method: unknown method '" + QuoteForMessage(args.method) +
                       "'; use forward, backward, stepwise, all-subsets or none");
    }
    loaded.plan.search.method = *method;
  }
  if (!args.criterion.empty()) {
    const auto criterion = CriterionFromString(args.criterion);
    if (!criterion) {
      throw InputError("--criterion: unknown criterion '" + QuoteForMessage(args.criterion) +
                       "'; use adj-r2, aic, aicc, bic, cp, partial-f or cv");
    }
    loaded.plan.search.criterion = *criterion;
  }
  if (shaped_by_command_line) {
    loaded.json = PlanToJson(loaded.plan);
    loaded.verbatim = loaded.json.dump(2) + "\n";
  }

  // The same run as the one `verify --data` replays (audit/audit_document.h).
  RunOptions run_options;
  run_options.csv = MakeCsvOptions(context.common);
  run_options.threads = context.common.threads;
  run_options.fit.max_refinement_passes = args.refinement_passes;
  run_options.diagnostics = !args.out_dir.empty();  // the audit's extrapolation caution needs it
  ProgressLine progress(context.err);
  const bool show_progress = !context.common.quiet && isatty(STDERR_FILENO) != 0;
  log.info("running the plan on {}", args.data);
  const RunResult run =
      RunPlan(args.data, loaded, run_options, show_progress ? &progress : nullptr);
  for (const auto& [term, reason] : run.design.skipped) log.warn("term '{}' skipped: {}", term, reason);
  log.info("search: {} ({} steps)", ToString(run.search.outcome), run.search.steps.size());
  const SearchResult& result = run.search;
  const FitResult& fit = run.fit;
  const std::vector<Caution> cautions = ComputeCautions(run);

  nlohmann::json document = RouteToJson(result);
  document["search"] = SearchSummaryToJson(result);
  document["model"] = ModelToJson(fit);
  document["cautions"] = CautionsToJson(cautions);
  document["data"] = {{"file", args.data},
                      {"rows_read", run.accounting.rows_read},
                      {"rows_used", run.accounting.rows_used}};

  if (!args.out_dir.empty()) WriteAuditAndReport(args, run, context);

  if (context.common.json) {
    context.out << document.dump(2) << "\n";
    return 0;
  }
  context.out << result.FullReport() << "\nFinal model\n" << fit.FullReport();
  if (!context.common.quiet) {
    context.out << "\nCautions:\n";
    for (const Caution& caution : cautions) context.out << "  - " << caution.message << "\n";
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
  command->add_option("--out", args->out_dir, "Folder for audit.json and the reviewer report report.html (written atomically)")
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
      "{steps, subsets (all-subsets), search, model, cautions, data}. With --out DIR: DIR/audit.json "
      "and DIR/report.html (the report with the diagnostics of the final model; see `stepledger "
      "report --help`); an existing file is refused without --force.\n\n"
      "Examples:\n  stepledger select examples/data/laptops.csv --plan examples/plans/stepwise_bic.json --out laptops-review\n"
      "  stepledger select examples/data/laptops.csv --response resale_price --method forward "
      "--criterion bic");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunSelect(*args, context); };
  });
}

}  // namespace stepledger::cli

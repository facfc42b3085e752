// `stepledger select DATA --plan PLAN [--out DIR]` and the quick form
// `stepledger select DATA --response COL [--method M] [--criterion C]`: runs the selection,
// prints the route, the final model as `fit` prints it, and the cautions.

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/cli/progress.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/report/report.h"
#include "stepledger/audit/route_json.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/audit/signature.h"
#include "stepledger/run/cautions.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/selection/search.h"

namespace stepledger::cli {
namespace {

struct SelectArgs {
  std::vector<std::string> data;  ///< one file, several files or one folder (engine/data_set.h)
  std::string plan;
  std::string response;
  std::string method;
  std::string criterion;
  std::string out_dir;
  std::string sign_key;  ///< --sign-key: Ed25519 private key (PEM) signing the audit's seal as a JWS
  int refinement_passes = 10;
};

// Writes DIR/audit.json and DIR/report.html as one unit. The audit document is built and sealed
// once; the report is rendered from that very document (with the diagnostics of the final model
// that the run's diagnostics pass computed) before anything is written. Returns the paths written.
std::vector<std::string> WriteAuditAndReport(const SelectArgs& args, const RunResult& run,
                                             CommandContext& context) {
  AuditDocumentOptions document_options;
  const nlohmann::json document = BuildSealedAudit(run, document_options, args.sign_key);
  WriteAuditWithReport(args.out_dir, document, run, context.common.force);
  const std::filesystem::path folder = args.out_dir;
  const std::string audit_path = (folder / kAuditFileName).string();
  const std::string report_path = (folder / kReportFileName).string();
  context.log->info("wrote {} (seal {}) and {}", audit_path, document.value("seal", ""), report_path);
  return {audit_path, report_path};
}

int RunSelect(const SelectArgs& args, CommandContext& context) {
  auto& log = *context.log;
  if (args.plan.empty() == args.response.empty()) {
    throw InputError("select: give either --plan PLAN or --response COL (exactly one)");
  }
  LoadedPlan loaded;
  if (!args.plan.empty()) {
    loaded = LoadPlanFile(args.plan, context.common.limits);
  } else {
    loaded.plan = MakeQuickPlan(args.response);
  }
  // The audit records the plan file's text, or, when the command line shapes the plan, the
  // normalised plan, so that a replay runs what was run.
  const bool shaped_by_command_line =
      args.plan.empty() || !args.method.empty() || !args.criterion.empty();
  if (!args.method.empty()) loaded.plan.search.method = ParseMethodOption(args.method);
  if (!args.criterion.empty()) loaded.plan.search.criterion = ParseCriterionOption(args.criterion);
  if (shaped_by_command_line) {
    loaded.json = PlanToJson(loaded.plan);
    loaded.verbatim = loaded.json.dump(2) + "\n";
  }

  // The same run as the one `verify --data` replays (audit/audit_document.h).
  RunOptions run_options;
  run_options.csv = MakeCsvOptions(context.common);
  run_options.threads = context.common.threads;
  run_options.work_dir = context.common.work_dir;
  run_options.limits = context.common.limits;
  run_options.shares = context.shares;
  run_options.fit.max_refinement_passes = args.refinement_passes;
  run_options.diagnostics = !args.out_dir.empty();  // the audit's extrapolation caution needs it
  const std::unique_ptr<ProgressPrinter> progress =
      MakeProgressPrinter(*context.terminal_err, context.common.quiet, "select");
  log.info("running the plan on {}", DataInputsText(args.data));
  const RunResult run = RunPlan(MakeDataSet(args.data), loaded, run_options, progress.get());
  log.info("search: {} ({} steps)", ToString(run.search.outcome), run.search.steps.size());
  const SearchResult& result = run.search;
  const FitResult& fit = run.fit;
  const std::vector<Caution> cautions = ComputeCautions(run);

  nlohmann::json document = RouteToJson(result);
  document["search"] = SearchSummaryToJson(result);
  document["model"] = ModelToJson(fit);
  document["cautions"] = CautionsToJson(cautions);
  document["validation"] = ValidationToJson(run.validation);
  document["data"] = {{"file", DataInputsText(args.data)},
                      {"rows_read", run.accounting.rows_read},
                      {"rows_used", run.accounting.rows_used}};
  if (run.plan.plan.search.holdout) document["data"]["rows_held_out"] = run.accounting.rows_held_out;
  if (run.data_is_set) document["data"]["files"] = DataFilesJson(run.data_files);
  document["model_statement"] = ModelStatement(run.design, fit);
  nlohmann::json left_out = nlohmann::json::array();
  for (const auto& [column, reason] : run.design.skipped) {
    left_out.push_back({{"column", column}, {"reason", reason}});
  }
  document["columns_left_out"] = left_out;

  std::vector<std::string> written;
  if (!args.out_dir.empty()) written = WriteAuditAndReport(args, run, context);
  if (!written.empty()) document["written"] = written;

  if (context.common.json) {
    context.out << JsonText(document) << "\n";
    return 0;
  }
  context.out << DataSetFilesText(run);
  if (!run.design.skipped.empty() && !context.common.quiet) {
    // "terms": "all" left these columns out (ReasonNotACandidateTerm); say so before the route.
    const std::size_t count = run.design.skipped.size();
    context.out << "Note: " << (count == 1 ? "one column" : FormatCount(static_cast<std::int64_t>(count)) + " columns")
                << " left out of the candidate terms (\"terms\": \"all\"):\n";
    for (const auto& [column, reason] : run.design.skipped) {
      context.out << "  - " << column << ": " << reason << "\n";
    }
    context.out << "\n";
  }
  context.out << result.FullReport() << "\nFinal model: " << ModelStatement(run.design, fit) << "\n"
              << fit.FullReport() << "\n" << ValidationSummaryText(run.validation, fit.criteria.sigma);
  if (const std::string detail = ValidationDetailText(run.validation); !detail.empty()) {
    context.out << "\n" << detail;
  }
  if (!context.common.quiet) {
    context.out << "\nCautions:\n";
    for (const Caution& caution : cautions) context.out << "  - " << caution.message << "\n";
  }
  if (!written.empty()) {
    context.out << "\nWrote " << written[0] << " (the audit) and " << written[1]
                << " (the reviewer's report)\n";
  }
  return 0;
}

}  // namespace

void AddSelectCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<SelectArgs>();
  CLI::App* command = app.add_subcommand(
      "select", "Choose the terms of a linear model and show every step of the route");
  command->add_option("DATA", args->data, kDataInputHelp)
      ->required()
      ->expected(1, -1)
      ->check(kExistingDataInput);
  command->add_option("--plan", args->plan, "Plan file (JSON): response, terms, method, criterion")
      ->check(kExistingInputFile)
      ->type_name("PLAN");
  command->add_option("--response", args->response,
                      "Quick form: the response column; every other column is a candidate term")
      ->type_name("COL");
  command->add_option("--method", args->method,
                      "forward, backward, stepwise, all-subsets or none, any case (overrides the plan)")
      ->type_name("M");
  command->add_option("--criterion", args->criterion,
                      "adj-r2, aic, aicc, bic, cp, partial-f or cv, any case (overrides the plan)")
      ->type_name("C");
  CLI::Option* out = command->add_option("--out", args->out_dir,
                                         "Folder for audit.json and the reviewer's report report.html "
                                         "(written atomically)")
                         ->type_name("DIR");
  command->add_option("--sign-key", args->sign_key, "Ed25519 private key (PEM) signing the audit's seal (a JWS, EdDSA)")
      ->check(kExistingInputFile)
      ->type_name("FILE")
      ->needs(out);
  command->add_option("--refine", args->refinement_passes,
                      "Largest number of refinement passes of the final fit (0: factor only)")
      ->check(CLI::Range(0, 100))
      ->type_name("N");
  AddCommonOptions(*command, context.common);
  command->get_option("--force")->needs(out)->description("Allow overwriting audit.json and report.html in --out");
  const std::string program = ProgramWord();
  command->footer(
      std::string(kDataSetHelp) +
      "One streaming pass builds the factor of every candidate column; the search then works on "
      "the factor alone. Prints the route (step, action, term, criterion before -> after, the "
      "rule that decided), the final model in words and as `fit` prints it, and the cautions. "
      "With --json: {steps, subsets (all-subsets), search, model, model_statement, "
      "columns_left_out, cautions, validation, data, written}. With --out DIR: DIR/audit.json and "
      "DIR/report.html (the report with the diagnostics of the final model; see `stepledger "
      "report --help`), both paths printed at the end; an existing file is refused without "
      "--force. --method and --criterion take any case (AIC, Forward).\n\n"
      "Quick form (--response COL): every other column is a candidate term (\"terms\": \"all\"), "
      "numeric as it is, categorical where not numeric, except columns that cannot be terms, "
      "named in a note with the reason: empty columns, a single level, identifiers (every value "
      "distinct) and categorical columns with more than 100 levels (a plan's \"max_levels\" "
      "raises the limit). A file of more than 10,000 columns, or 2,000 usable ones, is refused "
      "before the search; --limit columns=N and --limit terms=N raise those limits.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExamples:\n"
      "  " + program + " select build/demo/laptops.csv --plan build/demo/plan.json --out build/demo/review --force\n"
      "  " + program + " select build/demo/laptops.csv --response resale_price --method forward "
      "--criterion AIC");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunSelect(*args, context); };
  });
}

}  // namespace stepledger::cli

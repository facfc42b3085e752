// `stepledger rerun AUDIT DATA --out DIR`: the recorded plan on new data. Writes DIR/audit.json
// (linked to its parent's seal, with a `comparison` section) and DIR/report.html; the terminal
// shows the verdict and what changed.

#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "commands.h"
#include "stepledger/cli/progress.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/replay.h"
#include "stepledger/audit/rerun.h"
#include "stepledger/report/report.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/errors.h"

namespace stepledger::cli {
namespace {

struct RerunArgs {
  std::string audit;
  std::vector<std::string> data;  ///< one file, several files or one folder (engine/data_set.h)
  std::string out;
  std::string sign_key;
  CLI::Option* delimiter_option = nullptr;
};

int RunRerun(const RerunArgs& args, CommandContext& context) {
  const nlohmann::json parent = ReadAuditFile(args.audit);
  const VerifyReport integrity = CheckAuditIntegrity(parent, {}, context.common.limits);
  if (!integrity.Holds()) {
    throw InputError(args.audit + ": the parent audit does not verify (" + integrity.problems.front() +
                     "); run '" + ProgramWord() + " verify " + args.audit + "' for the details");
  }
  const std::filesystem::path folder = args.out;
  const std::filesystem::path audit_path = folder / kAuditFileName;
  const std::filesystem::path report_path = folder / kReportFileName;
  // Refuse before the run; WriteAuditFolder checks again before anything is written.
  for (const std::filesystem::path& path : {audit_path, report_path}) {
    std::error_code error;
    if (!context.common.force && std::filesystem::exists(path, error)) {
      throw InputError(path.string() + ": file exists; use --force to overwrite");
    }
  }
  ReplayOverrides overrides;
  if (args.delimiter_option != nullptr && args.delimiter_option->count() > 0) {
    overrides.delimiter = MakeCsvOptions(context.common).delimiter;
  }
  if (context.common.threads_given) overrides.threads = context.common.threads;
  overrides.work_dir = context.common.work_dir;
  overrides.limits = context.common.limits;
  overrides.shares = context.shares;
  if (context.log) context.log->info("running the plan of {} on {}", args.audit, DataInputsText(args.data));
  const DataSet data = MakeDataSet(args.data);
  const std::unique_ptr<ProgressPrinter> progress =
      MakeProgressPrinter(*context.terminal_err, context.common.quiet, "rerun");
  const RerunResult rerun = RerunRecordedPlan(parent, data, args.audit, overrides, progress.get(), args.sign_key);
  const RunResult& run = rerun.run;
  const AuditComparison& comparison = rerun.comparison;
  const nlohmann::json& written = rerun.audit;
  // The new audit and its reviewer's report, written as one unit (as select writes them).
  WriteAuditWithReport(folder, written, run, context.common.force);

  if (context.common.json) {
    context.out << JsonText(nlohmann::json{{"audit", audit_path.string()},
                                  {"report", report_path.string()},
                                  {"verdict", ToString(comparison.verdict)},
                                  {"model_statement", ModelStatement(run.design, run.fit)},
                                  {"comparison", comparison.ToJson()}})
                << "\n";
  } else {
    context.out << DataSetFilesText(run) << comparison.FullReport() << "\n"
                << "New model: " << ModelStatement(run.design, run.fit) << "\n"
                << run.search.BriefReport();
    if (!context.common.quiet) {
      context.out << "\nWrote " << audit_path.string() << " (the new audit, linked to its parent) and "
                  << report_path.string() << " (the reviewer's report)\n";
    }
  }
  return static_cast<int>(ExitStatus::kDone);
}

}  // namespace

void AddRerunCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<RerunArgs>();
  CLI::App* command = app.add_subcommand(
      "rerun",
      "Runs the plan recorded in an audit on new data and writes a new audit linked to its "
      "parent's seal, and its report. Gives the verdict on the final models (same model, same "
      "terms with refitted coefficients, or different terms) and shows what changed: plan keys, "
      "columns added or lost, numeric columns that really moved, the first step where the "
      "routes part, terms that entered or left, coefficient changes in units of their old "
      "standard errors, and the old model's error on the new rows (priced as predict prices "
      "them) beside the new model's.");
  command->add_option("AUDIT", args->audit, "The parent audit file")->required()->check(kExistingInputFile);
  command->add_option("DATA", args->data, "New data: a CSV file, or several files or one folder read as one data set")
      ->required()
      ->expected(1, -1)
      ->check(kExistingDataInput);
  command->add_option("--out", args->out, "Output folder for the new audit.json and report.html")
      ->required()
      ->type_name("DIR");
  command->add_option("--sign-key", args->sign_key, "Ed25519 private key (PEM) signing the new audit's seal (a JWS, EdDSA)")
      ->check(kExistingInputFile)
      ->type_name("FILE");
  AddCommonOptions(*command, context.common);
  args->delimiter_option = command->get_option("--delimiter");
  command->footer(
      "Verdicts (text, and the JSON field `verdict`): same model; same terms, refitted "
      "coefficients; different terms (see `stepledger compare --help` for the rules). Exit 0 "
      "whenever the new audit and report were written, whatever the verdict (a rerun on new data "
      "is expected to refit); use `stepledger compare` for an exit status that tells a "
      "difference. The data are read with the parent's recorded delimiter unless --delimiter is "
      "given.\n\n" + std::string(kDataSetHelp) +
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n  " +
      ProgramWord() + " rerun build/demo/audit.json build/demo/laptops_month2.csv --out build/demo/month2 --force");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunRerun(*args, context); };
  });
}

}  // namespace stepledger::cli

// `stepledger rerun AUDIT DATA --out DIR`: the recorded plan on new data. The new audit records
// its parent's seal and a `comparison` section; the terminal shows what changed.

#include <memory>
#include <string>

#include "commands.h"
#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/replay.h"
#include "stepledger/engine/errors.h"

namespace stepledger::cli {
namespace {

struct RerunArgs {
  std::string audit;
  std::string data;
  std::string out;
  std::string sign_key;
  CLI::Option* delimiter_option = nullptr;
  CLI::Option* threads_option = nullptr;
};

int RunRerun(const RerunArgs& args, CommandContext& context) {
  const nlohmann::json parent = ReadAuditFile(args.audit);
  const VerifyReport integrity = CheckAuditIntegrity(parent);
  if (!integrity.Holds()) {
    throw InputError(args.audit + ": the parent audit does not verify (" + integrity.problems.front() +
                     "); run 'stepledger verify' on it");
  }
  ReplayOverrides overrides;
  if (args.delimiter_option != nullptr && args.delimiter_option->count() > 0) {
    overrides.delimiter = MakeCsvOptions(context.common).delimiter;
  }
  if (args.threads_option != nullptr && args.threads_option->count() > 0) {
    overrides.threads = context.common.threads;
  }
  if (context.log) context.log->info("running the plan of {} on {}", args.audit, args.data);
  const RunResult run = ReplayRecordedPlan(parent, args.data, args.audit, overrides);

  const nlohmann::json unsealed = BuildAuditDocument(run);
  nlohmann::json comparison = CompareAudits(parent, unsealed);
  comparison["prediction"] = PredictionComparison(parent, unsealed, args.data, run.options.csv);

  AuditDocumentOptions document_options;
  document_options.parent = nlohmann::json{
      {"seal", parent.at("seal")},
      {"created_at", parent.value("created_at", nlohmann::json(nullptr))},
      {"data_sha256", parent.at("data").value("sha256", nlohmann::json(nullptr))},
      {"data_file", parent.at("data").value("file", nlohmann::json(nullptr))}};
  document_options.comparison = comparison;
  AuditOutputOptions output;
  output.folder = args.out;
  output.overwrite = context.common.force;
  output.sign_key = args.sign_key;
  WriteAuditDocument(run, document_options, output);
  const std::string written = (std::filesystem::path(args.out) / kAuditFileName).string();

  if (context.common.json) {
    context.out << nlohmann::json{{"audit", written}, {"comparison", comparison}}.dump(2) << "\n";
  } else {
    context.out << run.search.BriefReport() << "\n" << ComparisonReport(comparison);
    if (!context.common.quiet) context.out << "Wrote " << written << "\n";
  }
  return 0;
}

}  // namespace

void AddRerunCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<RerunArgs>();
  CLI::App* command = app.add_subcommand(
      "rerun",
      "Runs the plan recorded in an audit on new data and writes a new audit linked to its "
      "parent's seal. Shows what changed: columns added or lost, ranges and means that moved, "
      "the first step where the routes part, terms that entered or left the final model, "
      "coefficient changes in units of their standard errors, and the old model's error on the "
      "new rows beside the new model's.");
  command->add_option("AUDIT", args->audit, "The parent audit file")->required()->check(CLI::ExistingFile);
  command->add_option("DATA", args->data, "New data file (CSV)")->required()->check(CLI::ExistingFile);
  command->add_option("--out", args->out, "Output folder for the new audit.json")->required()->type_name("DIR");
  command->add_option("--sign-key", args->sign_key, "Ed25519 private key (PEM) to sign the new audit")
      ->check(CLI::ExistingFile)
      ->type_name("FILE");
  AddCommonOptions(*command, context.common);
  args->delimiter_option = command->get_option("--delimiter");
  args->threads_option = command->get_option("--threads");
  command->footer("Example:\n  stepledger rerun q3/audit.json laptops_q4.csv --out q4");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunRerun(*args, context); };
  });
}

}  // namespace stepledger::cli

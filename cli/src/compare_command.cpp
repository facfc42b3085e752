// `stepledger compare A B`: what changed from audit A to audit B. Exit 1 when the final models
// differ, 0 when they are the same, 2 for unreadable input.

#include <memory>
#include <string>

#include "commands.h"
#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/cli/run_cli.h"

namespace stepledger::cli {
namespace {

struct CompareArgs {
  std::string old_audit;
  std::string new_audit;
  std::string data;
};

int RunCompare(const CompareArgs& args, CommandContext& context) {
  const nlohmann::json old_audit = ReadAuditFile(args.old_audit);
  const nlohmann::json new_audit = ReadAuditFile(args.new_audit);
  nlohmann::json comparison = CompareAudits(old_audit, new_audit);
  if (!args.data.empty()) {
    CsvOptions csv = MakeCsvOptions(context.common);
    csv.delimiter = RunOptionsFromSettings(new_audit.value("settings", nlohmann::json::object())).csv.delimiter;
    comparison["prediction"] = PredictionComparison(old_audit, new_audit, args.data, csv);
  }
  // A comparison of edited files would mislead: say so (verify gives the details).
  nlohmann::json warnings = nlohmann::json::array();
  for (const auto& [name, audit] : {std::pair{args.old_audit, &old_audit}, std::pair{args.new_audit, &new_audit}}) {
    const VerifyReport integrity = CheckAuditIntegrity(*audit);
    if (!integrity.Holds()) warnings.push_back(name + " does not verify: " + integrity.problems.front());
  }
  if (context.common.json) {
    context.out << nlohmann::json{{"old", args.old_audit}, {"new", args.new_audit}, {"comparison", comparison},
                                  {"warnings", warnings}}
                       .dump(2)
                << "\n";
  } else {
    for (const auto& warning : warnings) context.out << "Warning: " << warning.get<std::string>() << "\n";
    context.out << ComparisonReport(comparison);
  }
  return FinalModelsDiffer(comparison) ? static_cast<int>(ExitStatus::kDifferenceFound)
                                       : static_cast<int>(ExitStatus::kDone);
}

}  // namespace

void AddCompareCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<CompareArgs>();
  CLI::App* command = app.add_subcommand(
      "compare",
      "Compares two audits, old then new: columns added or lost, ranges and means that moved, "
      "the first step where the routes part, terms that entered or left the final model, and "
      "coefficient changes in units of their standard errors. Exit 1 when the final models "
      "differ.");
  command->add_option("A", args->old_audit, "The old audit")->required()->check(CLI::ExistingFile);
  command->add_option("B", args->new_audit, "The new audit")->required()->check(CLI::ExistingFile);
  command->add_option("--data", args->data,
                      "B's data: also evaluates A's model on these rows beside B's model")
      ->check(CLI::ExistingFile)
      ->type_name("DATA");
  AddCommonOptions(*command, context.common);
  command->footer(
      "The comparison is the same as the one rerun prints; with --data the old model's error on\n"
      "the new rows is shown beside the new model's.\nExample:\n"
      "  stepledger compare march/audit.json april/audit.json --data laptops_april.csv");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunCompare(*args, context); };
  });
}

}  // namespace stepledger::cli

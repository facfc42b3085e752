// `stepledger compare A B`: what changed from audit A to audit B, with one of three verdicts
// (audit/audit_compare.h). Exit 0 for "same model", 1 for "same terms, refitted coefficients"
// and for "different terms" (the verdict text and the JSON field `verdict` tell them apart),
// 2 for unreadable input.

#include <memory>
#include <string>
#include <vector>

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
  std::vector<std::string> data;  ///< --data: one file, several files or one folder
};

int RunCompare(const CompareArgs& args, CommandContext& context) {
  const nlohmann::json old_audit = ReadAuditFile(args.old_audit);
  const nlohmann::json new_audit = ReadAuditFile(args.new_audit);
  CompareOptions compare_options;
  compare_options.old_name = args.old_audit;
  compare_options.new_name = args.new_audit;
  AuditComparison comparison = CompareAudits(old_audit, new_audit, compare_options);
  if (!args.data.empty()) {
    // B's data are read the way B's run read them (its recorded delimiter).
    const CsvOptions csv = RunOptionsFromSettings(new_audit.value("settings", nlohmann::json::object()), args.new_audit).csv;
    comparison.prediction = PredictionComparison(old_audit, new_audit, MakeDataSet(args.data), csv);
  }
  // A comparison of edited files would mislead: say so first (verify gives the details).
  nlohmann::json warnings = nlohmann::json::array();
  for (const auto& [name, audit] : {std::pair{args.old_audit, &old_audit}, std::pair{args.new_audit, &new_audit}}) {
    const VerifyReport integrity = CheckAuditIntegrity(*audit, {}, context.common.limits);
    if (!integrity.Holds()) warnings.push_back(name + " does not verify: " + integrity.problems.front());
  }
  if (context.common.json) {
    context.out << JsonText(nlohmann::json{{"old", args.old_audit},
                                  {"new", args.new_audit},
                                  {"verdict", ToString(comparison.verdict)},
                                  {"comparison", comparison.ToJson()},
                                  {"warnings", warnings}})
                << "\n";
  } else {
    for (const auto& warning : warnings) context.out << "Warning: " << warning.get<std::string>() << "\n";
    context.out << comparison.FullReport();
  }
  return comparison.ModelsDiffer() ? static_cast<int>(ExitStatus::kDifferenceFound)
                                    : static_cast<int>(ExitStatus::kDone);
}

}  // namespace

void AddCompareCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<CompareArgs>();
  CLI::App* command = app.add_subcommand(
      "compare",
      "Compares two audits, old then new, and gives one of three verdicts on their final "
      "models: same model, same terms with refitted coefficients, or different terms. Also shows "
      "the plan keys that differ (method, criterion, thresholds, terms, ...), columns added or "
      "lost, numeric columns that really moved, the first step where the routes part, terms that "
      "entered or left, and coefficient changes in units of their old standard errors.");
  command->add_option("A", args->old_audit, "The old audit")->required()->check(kExistingInputFile);
  command->add_option("B", args->new_audit, "The new audit")->required()->check(kExistingInputFile);
  command->add_option("--data", args->data,
                      "B's data (a file, or a data set's files or folder): also prices them with A's model, "
                      "as predict does, beside B's error")
      ->expected(1, -1)
      ->check(kExistingDataInput)
      ->type_name("DATA");
  // Reads no data but --data (read with B's recorded delimiter), writes no file, folds no factor.
  AddCommonOptions(*command, context.common, kJsonOption | kQuietOption | kLogLevelOption);
  command->footer(
      "Verdicts and exit statuses:\n"
      "  same model                         0  the same terms, every estimate within 1e-9 relative\n"
      "  same terms, refitted coefficients  1  the same terms, some estimate moved\n"
      "  different terms                    1  a term entered or left the final model\n"
      "  (2: an input cannot be read; the JSON field `verdict` holds the verdict's text)\n"
      "A numeric column is listed as moved when its mean moved, or its range reaches beyond the old "
      "one, by more than 0.1 old standard deviations; a coefficient change beyond 2 old standard errors is marked "
      "'*' (beyond_mark in JSON). With --data, A's model prices B's rows through the same path "
      "as predict (a row with a level A never saw is not priced, and counted) and its error on "
      "them is shown beside B's own. An audit that does not verify is named in a warning first.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExamples:\n  " +
      ProgramWord() +
      " rerun build/demo/audit.json build/demo/laptops_month2.csv --out build/demo/month2 --force\n  " +
      ProgramWord() + " compare build/demo/audit.json build/demo/month2/audit.json --data build/demo/laptops_month2.csv");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunCompare(*args, context); };
  });
}

}  // namespace stepledger::cli

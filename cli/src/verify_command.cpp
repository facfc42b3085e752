// `stepledger verify AUDIT [--data DATA] [--public-key FILE]`: checks the step chain, the
// section digests, the seal and the signature; with data, the fingerprint and a replay of the
// recorded plan. Exit 0 when everything holds, 1 when anything differs, 2 for unreadable input.

#include <memory>
#include <string>
#include <vector>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/cli/run_cli.h"

namespace stepledger::cli {
namespace {

struct VerifyArgs {
  std::string audit;
  std::vector<std::string> data;  ///< --data: one file, several files or one folder
  std::string public_key;
};

int RunVerify(const VerifyArgs& args, CommandContext& context) {
  const nlohmann::json document = ReadAuditFile(args.audit);
  VerifyOptions options;
  options.public_key = args.public_key;
  if (!args.data.empty()) options.data = MakeDataSet(args.data);
  options.threads = context.common.threads_given ? context.common.threads : 0;
  options.work_dir = context.common.work_dir;
  options.limits = context.common.limits;
  options.shares = context.shares;
  if (!args.data.empty() && context.log) context.log->info("replaying the plan on {}", DataInputsText(args.data));
  const VerifyReport report = VerifyAudit(document, options);
  if (context.common.json) {
    nlohmann::json result = report.ToJson();
    result["audit"] = args.audit;
    context.out << JsonText(result) << "\n";
  } else {
    context.out << args.audit << ":\n" << report.FullReport();
  }
  if (!report.Holds()) {
    context.err << "stepledger: " << args.audit << ": " << report.problems.front() << "\n";
    return static_cast<int>(ExitStatus::kDifferenceFound);
  }
  return static_cast<int>(ExitStatus::kDone);
}

}  // namespace

void AddVerifyCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<VerifyArgs>();
  CLI::App* command = app.add_subcommand(
      "verify",
      "Checks an audit file: the digest of every step (chained from the plan and the data), the "
      "digest of every other section, the seal over the whole document and, when present, the "
      "signature (a JWS, EdDSA with Ed25519; RFC 7515, RFC 8037); names the first step or key that does not match. With --data it also "
      "checks the data's fingerprint and replays the recorded plan, comparing the route step by "
      "step (actions and terms exactly, numbers to 1e-9 relative). Exit 0 when everything holds, "
      "1 when anything differs, 2 when an input cannot be read. A data set's files are part of its "
      "fingerprint in their order: given in another order, verify says so and fails.");
  command->add_option("AUDIT", args->audit, "Audit file (audit.json)")->required();
  CLI::Option* data = command->add_option("--data", args->data,
                                          "The data the audit was made from: fingerprint and replay (a data "
                                          "set: its files in the recorded order, or its folder)")
                          ->expected(1, -1)
                          ->check(kExistingDataInput)
                          ->type_name("DATA");
  command->add_option("--public-key", args->public_key,
                      "Ed25519 public key the signature must verify against: PEM, or a JWK "
                      "(kty OKP, crv Ed25519, x), told apart by the file's content")
      ->check(kExistingInputFile)
      ->type_name("FILE");
  // Writes no file; the replay reads the data with the audit's recorded delimiter.
  AddCommonOptions(*command, context.common, kAllCommonOptions & ~kForceOption & ~kDelimiterOption);
  command->get_option("--threads")->needs(data)->description("Threads folding the factor of the replay");
  command->get_option("--limit")->needs(data);
  command->footer(
      "Unkeyed digests and the seal catch accidental and casual edits; only a signature checked "
      "against a public key you obtained yourself shows who produced the file.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n  " +
      ProgramWord() + " verify build/demo/audit.json --data build/demo/laptops.csv");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunVerify(*args, context); };
  });
}

}  // namespace stepledger::cli

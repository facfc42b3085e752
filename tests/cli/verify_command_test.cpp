// `stepledger verify`: exit 0 when everything holds, 1 when anything differs (naming the first
// place), 2 for unreadable input. Run in-process through RunCli.

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/jws.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::RunStepledger;

class VerifyCommand : public ::testing::Test {
 protected:
  void SetUp() override {
    data_ = dir_.Write("laptops.csv", testing::LaptopCsv());
    audit_ = testing::WriteAuditWithLibrary(data_, testing::LaptopPlan(), dir_.path() / "out");
  }
  std::filesystem::path Tampered(const std::function<void(json&)>& edit) {
    json document = testing::ReadJsonFile(audit_);
    edit(document);
    const auto path = dir_.path() / ("tampered-" + std::to_string(counter_++) + ".json");
    testing::WriteJsonFile(path, document);
    return path;
  }
  testing::TempDir dir_;
  std::filesystem::path data_, audit_;
  int counter_ = 0;
};

TEST_F(VerifyCommand, AnUntamperedAuditExitsZero) {
  const auto run = RunStepledger({"verify", audit_.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_NE(run.out.find("The audit holds as a record; the data it was made from were not checked."),
            std::string::npos) << run.out;
  EXPECT_NE(run.out.find("data fingerprint and replay: NOT CHECKED (give --data FILE"), std::string::npos)
      << "says what was not checked and how to check it: " << run.out;
  EXPECT_NE(run.out.find("no signature"), std::string::npos) << "says what an unsigned audit proves";
}

TEST_F(VerifyCommand, ControlAnAuditReserialisedByPythonVerifies) {
  // Debian's python3 json module: other indentation, ASCII escapes, its own number spelling.
  const auto copy = dir_.path() / "python.json";
  const int status = testing::RunCommand(
      testing::ReferencePython() + " -c \"import json,sys; d=json.load(open(sys.argv[1])); "
                                   "json.dump(d, open(sys.argv[2],'w'), indent=5, ensure_ascii=True)\" '" +
      audit_.string() + "' '" + copy.string() + "'");
  ASSERT_EQ(status, 0);
  ASSERT_NE(testing::ReadText(copy), testing::ReadText(audit_)) << "the bytes must differ";
  const auto run = RunStepledger({"verify", copy.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
}

TEST_F(VerifyCommand, TamperingExitsOneAndNamesThePlace) {
  struct Case {
    const char* what;
    std::function<void(json&)> edit;
    const char* named;
  };
  const std::vector<Case> cases = {
      {"a number in a candidate table",
       [](json& d) { d["steps"][1]["candidates"][2]["f"] = 123.25; }, "step 1 ["},
      {"two steps swapped", [](json& d) { std::swap(d["steps"][1], d["steps"][2]); },
       "step 1 (recorded index 2)"},
      {"a step deleted", [](json& d) { d["steps"].erase(1); }, "step 1 (recorded index 2)"},
      {"the plan edited", [](json& d) { d["plan"]["verbatim"] = "{\"response\": \"price\", \"terms\": \"all\"}"; },
       "key 'plan' does not match its digest"},
      {"the final model changed", [](json& d) { d["model"]["coefficients"][0]["se"] = 1.0; },
       "key 'model' does not match its digest"},
      {"a caution removed", [](json& d) { d["cautions"].erase(0); }, "key 'cautions' does not match"},
  };
  for (const Case& tamper : cases) {
    SCOPED_TRACE(tamper.what);
    const auto run = RunStepledger({"verify", Tampered(tamper.edit).string()});
    EXPECT_EQ(run.status, 1) << run.out << run.err;
    EXPECT_NE(run.err.find(tamper.named), std::string::npos) << run.err;
    EXPECT_NE(run.out.find(std::string("First difference: ") + tamper.named), std::string::npos) << run.out;
  }
}

TEST_F(VerifyCommand, UnreadableInputExitsTwo) {
  EXPECT_EQ(RunStepledger({"verify", (dir_.path() / "absent.json").string()}).status, 2);
  const auto broken = dir_.Write("broken.json", "{\"format\": \"stepledger-audit\", ");
  const auto run = RunStepledger({"verify", broken.string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("broken.json:1:"), std::string::npos) << run.err;
  EXPECT_EQ(run.ErrLines().size(), 1u);
  EXPECT_EQ(RunStepledger({"verify", audit_.string(), "--data", (dir_.path() / "absent.csv").string()}).status, 2);
}

TEST_F(VerifyCommand, SignaturesAreCheckedAgainstTheGivenPublicKey) {
  const auto key = dir_.path() / "key.pem", public_key = dir_.path() / "key.pub";
  const auto other_key = dir_.path() / "other.pem", other_public = dir_.path() / "other.pub";
  if (!testing::MakeEd25519KeyPair(key, public_key) || !testing::MakeEd25519KeyPair(other_key, other_public)) {
    GTEST_SKIP() << "openssl cannot make Ed25519 keys here";
  }
  const auto signed_audit = testing::WriteAuditWithLibrary(data_, testing::LaptopPlan(), dir_.path() / "signed", key);
  auto run = RunStepledger({"verify", signed_audit.string(), "--public-key", public_key.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_NE(run.out.find("signature: holds"), std::string::npos) << run.out;

  run = RunStepledger({"verify", signed_audit.string(), "--public-key", other_public.string()});
  EXPECT_EQ(run.status, 1) << run.out;
  // The signed header's kid names the signer's key, not the one given.
  EXPECT_NE(run.err.find("protected header 'kid' is"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("another key signed the audit"), std::string::npos) << run.err;

  // The same public key as a JWK file (told from PEM by its content); a JWK of another curve is
  // bad input naming the file and the member.
  const auto jwk = dir_.path() / "key.jwk";
  testing::WriteJsonFile(jwk, Ed25519Jwk(Ed25519PublicKeyFromPemFile(public_key)));
  run = RunStepledger({"verify", signed_audit.string(), "--public-key", jwk.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_NE(run.out.find("signature: holds"), std::string::npos) << run.out;
  json x25519 = Ed25519Jwk(Ed25519PublicKeyFromPemFile(public_key));
  x25519["crv"] = "X25519";
  testing::WriteJsonFile(jwk, x25519);
  run = RunStepledger({"verify", signed_audit.string(), "--public-key", jwk.string()});
  EXPECT_EQ(run.status, 2) << run.out << run.err;
  EXPECT_NE(run.err.find("key file '" + jwk.string() + "': key 'crv' is \"X25519\", expected \"Ed25519\""),
            std::string::npos)
      << run.err;

  // Without --public-key the recorded key is used, and the output says what that does not prove.
  run = RunStepledger({"verify", signed_audit.string()});
  EXPECT_EQ(run.status, 0);
  EXPECT_NE(run.out.find("give --public-key to check who signed"), std::string::npos) << run.out;

  // Someone who edits the file, recomputes everything and re-signs with their own key passes the
  // recorded-key check but not the reviewer's key.
  json forged = testing::ReadJsonFile(signed_audit);
  forged["model"]["coefficients"][0]["estimate"] = 1.0;
  SealAuditDocument(forged, nullptr);
  const Ed25519Signer forger = Ed25519Signer::FromPemFile(other_key);
  SealAuditDocument(forged, &forger);
  const auto forged_path = dir_.path() / "forged.json";
  testing::WriteJsonFile(forged_path, forged);
  EXPECT_EQ(RunStepledger({"verify", forged_path.string()}).status, 0) << "unkeyed checks cannot catch this";
  EXPECT_EQ(RunStepledger({"verify", forged_path.string(), "--public-key", public_key.string()}).status, 1);

  // An unsigned audit checked against a key: nothing to check is a difference.
  run = RunStepledger({"verify", audit_.string(), "--public-key", public_key.string()});
  EXPECT_EQ(run.status, 1);
  EXPECT_NE(run.err.find("key 'signature' is missing"), std::string::npos) << run.err;
}

TEST_F(VerifyCommand, ReplayWithTheData) {
  auto run = RunStepledger({"verify", audit_.string(), "--data", data_.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_NE(run.out.find("replay: holds"), std::string::npos) << run.out;

  std::string csv = testing::LaptopCsv();
  csv.replace(csv.find("\n") + 1, 1, csv.substr(csv.find("\n") + 1, 1) == "9" ? "8" : "9");
  const auto changed = dir_.Write("changed.csv", csv);
  run = RunStepledger({"verify", audit_.string(), "--data", changed.string()});
  EXPECT_EQ(run.status, 1);
  EXPECT_NE(run.err.find("fingerprint mismatch"), std::string::npos) << run.err;

  run = RunStepledger({"verify", audit_.string(), "--data", data_.string(), "--json"});
  EXPECT_EQ(run.status, 0);
  const json result = json::parse(run.out);
  EXPECT_EQ(result["holds"], true);
  EXPECT_EQ(result["checks"]["fingerprint"], "holds");
}

TEST_F(VerifyCommand, SelectOutWritesAnAuditThatVerifiesAndReplays) {
  const auto plan = dir_.Write("plan.json", testing::LaptopPlan());
  const auto out = dir_.path() / "selected";
  auto run = RunStepledger({"select", data_.string(), "--plan", plan.string(), "--out", out.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  const json audit = testing::ReadJsonFile(out / "audit.json");
  EXPECT_EQ(audit["plan"]["verbatim"], testing::LaptopPlan());
  run = RunStepledger({"verify", (out / "audit.json").string(), "--data", data_.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  const std::string problems = testing::ValidateAuditAgainstSchema(out / "audit.json");
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Debian python3-jsonschema)";
  }
  // The same route as the library's audit of the same plan (which the other tests use).
  EXPECT_EQ(audit["digests"]["route"], testing::ReadJsonFile(audit_)["digests"]["route"]);

  // A plan shaped on the command line is recorded as run, so the replay reproduces it.
  const auto quick = dir_.path() / "quick";
  run = RunStepledger({"select", data_.string(), "--plan", plan.string(), "--method", "forward", "--criterion",
                       "aic", "--out", quick.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(testing::ReadJsonFile(quick / "audit.json")["plan"]["normalised"]["method"], "forward");
  run = RunStepledger({"verify", (quick / "audit.json").string(), "--data", data_.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;

  // An existing audit is not overwritten without --force.
  const std::string before = testing::ReadText(out / "audit.json");
  run = RunStepledger({"select", data_.string(), "--plan", plan.string(), "--out", out.string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("file exists; use --force"), std::string::npos) << run.err;
  EXPECT_EQ(testing::ReadText(out / "audit.json"), before);
}

// verify writes no file and reads the data with the audit's recorded delimiter; --threads only
// matters for the replay: options it would ignore are refused (exit 2), naming the option.
TEST_F(VerifyCommand, RefusesTheOptionsItWouldIgnore) {
  for (const std::vector<std::string>& extra : {std::vector<std::string>{"--force"}, {"--delimiter", ";"},
                                                 {"--threads", "2"}}) {
    std::vector<std::string> args = {"verify", audit_.string()};
    args.insert(args.end(), extra.begin(), extra.end());
    const auto run = RunStepledger(args);
    EXPECT_EQ(run.status, 2) << extra[0];
    EXPECT_NE(run.err.find(extra[0]), std::string::npos) << run.err;
  }
  const auto replay = RunStepledger({"verify", audit_.string(), "--data", data_.string(), "--threads", "2"});
  EXPECT_EQ(replay.status, 0) << replay.out << replay.err;
}

}  // namespace
}  // namespace stepledger

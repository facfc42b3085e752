// The audit document: its content, the integrity fields, reproducibility, schema validity and
// atomic writing. Data: the invented laptop stock of support/audit_test_data.h.

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/jws.h"

#include <signal.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <set>

#include <gtest/gtest.h>

#include "stepledger/audit/canonical_json.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::LaptopCsv;
using testing::LaptopPlan;
using testing::TempDir;

RunResult RunLaptops(const TempDir& dir, const std::string& plan_text = LaptopPlan()) {
  const auto data = dir.Write("laptops.csv", LaptopCsv());
  return RunPlan(data, ParsePlanText(plan_text), RunOptions{});
}

AuditDocumentOptions CreatedAt(const char* timestamp) {
  AuditDocumentOptions options;
  options.created_at = timestamp;
  return options;
}

std::set<std::string> FolderListing(const std::filesystem::path& folder) {
  std::set<std::string> names;
  for (const auto& entry : std::filesystem::directory_iterator(folder)) {
    names.insert(entry.path().filename().string());
  }
  return names;
}

TEST(AuditDocument, HoldsTheContractKeysAndTheRoute) {
  TempDir dir;
  const RunResult run = RunLaptops(dir);
  json document = BuildAuditDocument(run);
  SealAuditDocument(document);
  for (const char* key : {"format", "format_version", "tool", "created_at", "duration_seconds", "plan",
                          "settings", "data", "design", "search", "steps", "model", "numerics",
                          "cautions", "digests", "seal"}) {
    EXPECT_TRUE(document.contains(key)) << key;
  }
  EXPECT_EQ(document["format"], "stepledger-audit");
  EXPECT_EQ(document["format_version"], 4);
  ASSERT_TRUE(document.contains("validation")) << "the final model's k-fold error is always recorded";
  EXPECT_TRUE(document["validation"].contains("folds"));
  EXPECT_FALSE(document["validation"].contains("holdout")) << "the plan holds no rows out";
  EXPECT_FALSE(document["validation"].contains("bootstrap")) << "the plan asks for no replicates";
  EXPECT_FALSE(document.contains("subsets")) << "stepwise has no subsets table";
  EXPECT_FALSE(document.contains("signature"));
  EXPECT_EQ(document["plan"]["verbatim"], LaptopPlan());
  EXPECT_EQ(document["plan"]["normalised"]["hierarchy"], true) << "defaults are filled in";
  EXPECT_EQ(document["data"]["rows_read"], 200);
  EXPECT_EQ(document["data"]["columns"].size(), 7u);
  EXPECT_EQ(document["data"]["sha256"], FingerprintFile(dir.path() / "laptops.csv"));
  // The true model is known (invented data): age, ram, disk and grade matter; battery and
  // screen do not. With n = 200 and effects far above the noise, BIC stepwise finds them.
  std::set<std::string> final_terms;
  for (const auto& term : document["model"]["terms"]) final_terms.insert(term.get<std::string>());
  EXPECT_EQ(final_terms, (std::set<std::string>{"age", "ram", "disk", "grade"}));
  ASSERT_GE(document["steps"].size(), 3u);
  EXPECT_EQ(document["steps"].front()["action"], "start");
  EXPECT_EQ(document["steps"].back()["action"], "stop");
  EXPECT_FALSE(document["steps"][1]["candidates"].empty()) << "every step carries its candidate table";
  std::set<std::string> caution_kinds;
  for (const auto& caution : document["cautions"]) caution_kinds.insert(caution["kind"].get<std::string>());
  EXPECT_TRUE(caution_kinds.count("post-selection-inference"));
  EXPECT_TRUE(caution_kinds.count("extrapolation"));
  EXPECT_TRUE(caution_kinds.count("association"));
  EXPECT_TRUE(caution_kinds.count("collinearity"));
  EXPECT_GT(document["numerics"]["rcond"].get<double>(), 0.0);
  EXPECT_EQ(document["numerics"]["rank"], document["model"]["k"]);
}

TEST(AuditDocument, StepDigestsChainFromThePlanAndTheData) {
  TempDir dir;
  json document = BuildAuditDocument(RunLaptops(dir));
  SealAuditDocument(document);
  // Recomputed here from the definition (SHA-256 of the previous hex and the canonical step).
  json head = {{"format", document["format"]}, {"format_version", document["format_version"]},
               {"plan", document["plan"]}, {"data", document["data"]}};
  std::string previous = ToHex(Sha256(CanonicalJson(head)));
  EXPECT_EQ(document["digests"]["genesis"], previous);
  for (const json& step : document["steps"]) {
    json content = step;
    content.erase("digest");
    const std::string expected = ToHex(Sha256(previous + CanonicalJson(content)));
    EXPECT_EQ(step["digest"], expected) << "step " << step["index"];
    previous = expected;
  }
  EXPECT_EQ(document["digests"]["route"], previous);
  json unsealed = document;
  unsealed.erase("seal");
  EXPECT_EQ(document["seal"], ToHex(Sha256(CanonicalJson(unsealed))));
}

TEST(AuditDocument, TwoRunsDifferOnlyInTheTimeFields) {
  TempDir dir;
  const auto data = dir.Write("laptops.csv", LaptopCsv());
  const LoadedPlan plan = ParsePlanText(LaptopPlan());
  json first = BuildAuditDocument(RunPlan(data, plan, {}), CreatedAt("2026-01-01T00:00:00Z"));
  json second = BuildAuditDocument(RunPlan(data, plan, {}), CreatedAt("2026-06-30T12:00:00Z"));
  SealAuditDocument(first);
  SealAuditDocument(second);
  EXPECT_NE(first["seal"], second["seal"]) << "the seal covers the time fields";
  std::set<std::string> differing;
  for (auto it = first.begin(); it != first.end(); ++it) {
    if (!second.contains(it.key()) || second[it.key()] != it.value()) differing.insert(it.key());
  }
  std::set<std::string> allowed;
  for (auto field : kAuditTimeFields) allowed.insert(std::string(field));
  for (auto field : kAuditTimeDerivedFields) allowed.insert(std::string(field));
  for (const std::string& key : differing) EXPECT_TRUE(allowed.count(key)) << "differs: " << key;
  EXPECT_TRUE(differing.count("created_at"));
  EXPECT_EQ(first["digests"], second["digests"]) << "the digests leave the time fields to the seal";
  EXPECT_EQ(first["steps"], second["steps"]);
}

TEST(AuditDocument, EveryMethodGivesAnAuditTheSchemaAccepts) {
  TempDir dir;
  const auto data = dir.Write("laptops.csv", LaptopCsv());
  for (const char* method : {"forward", "backward", "stepwise", "all-subsets", "none"}) {
    SCOPED_TRACE(method);
    const RunResult run = RunPlan(data, ParsePlanText(LaptopPlan(method, "aic")), {});
    const auto folder = dir.path() / (std::string("out-") + method);
    AuditOutputOptions output;
    output.folder = folder;
    const json document = WriteAuditDocument(run, {}, output);
    EXPECT_EQ(document.contains("subsets"), std::string(method) == "all-subsets");
    const std::string problems = testing::ValidateAuditAgainstSchema(folder / "audit.json");
    if (problems == "skip") GTEST_SKIP() << "python3-jsonschema is missing for " << testing::ReferencePython();
    EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
  }
}

TEST(AuditDocument, TheSchemaRejectsAnAuditMissingItsSeal) {
  // Control: a validator that accepted anything would pass the test above.
  TempDir dir;
  json document = BuildAuditDocument(RunLaptops(dir));
  SealAuditDocument(document);
  document.erase("seal");
  document["format_version"] = kAuditFormatVersion + 1;
  const auto path = dir.path() / "broken.json";
  testing::WriteJsonFile(path, document);
  const std::string problems = testing::ValidateAuditAgainstSchema(path);
  if (problems == "skip") GTEST_SKIP() << "python3-jsonschema is missing";
  EXPECT_NE(problems.find("seal"), std::string::npos) << problems;
  EXPECT_NE(problems.find("format_version"), std::string::npos) << problems;
}

// The signature is a JWS with detached payload (RFC 7515 Appendix F) whose payload is the seal's
// 64 hex characters; recomputed here from the documented recipe (README "Signature") rather
// than through the verifier.
TEST(AuditDocument, SignatureIsADetachedJwsOverTheSealText) {
  TempDir dir;
  const auto key = dir.path() / "key.pem";
  if (testing::RunCommand("openssl genpkey -algorithm ed25519 -out '" + key.string() + "' 2>/dev/null") != 0) {
    GTEST_SKIP() << "openssl cannot make an Ed25519 key here";
  }
  AuditOutputOptions output;
  output.folder = dir.path() / "signed";
  output.sign_key = key;
  const json document = WriteAuditDocument(RunLaptops(dir), {}, output);
  ASSERT_TRUE(document.contains("signature"));
  const Ed25519Signer signer = Ed25519Signer::FromPemFile(key);
  const json& signature = document["signature"];
  EXPECT_EQ(signature["signed"], "seal");
  EXPECT_EQ(signature["jwk"], json({{"crv", "Ed25519"}, {"kty", "OKP"}, {"x", Base64UrlEncode(signer.PublicKey().raw())}}));
  const std::string seal = document["seal"].get<std::string>();
  ASSERT_EQ(seal.size(), 64u);
  const std::string header = R"({"alg":"EdDSA","kid":")" + JwkThumbprint(signer.PublicKey()) + "\"}";
  const std::string signing_input = Base64UrlEncode(header) + "." + Base64UrlEncode(seal);
  const std::string jws = signature["jws"].get<std::string>();
  // Ed25519 is deterministic (RFC 8032 §5.1.6): the same key and seal give this very text.
  EXPECT_EQ(jws, Base64UrlEncode(header) + ".." + Base64UrlEncode(signer.Sign(signing_input)));
  EXPECT_TRUE(signer.PublicKey().Verifies(signing_input, Base64UrlDecode(jws.substr(jws.rfind('.') + 1))));
  // The signed audit follows the schema (Draft 2020-12, Debian python3-jsonschema).
  const std::string problems = testing::ValidateAuditAgainstSchema(output.folder / "audit.json");
  if (problems == "skip") GTEST_SKIP() << "python3-jsonschema is missing for " << testing::ReferencePython();
  EXPECT_EQ(problems, "");
}

// --- Atomic writing: each failure gives a clear error and leaves the folder as it was. ---

TEST(AuditWriting, RefusesToOverwriteWithoutForce) {
  TempDir dir;
  const RunResult run = RunLaptops(dir);
  AuditOutputOptions output;
  output.folder = dir.path() / "out";
  WriteAuditDocument(run, CreatedAt("2026-01-01T00:00:00Z"), output);
  const std::string before = testing::ReadText(output.folder / "audit.json");
  try {
    WriteAuditDocument(run, CreatedAt("2026-02-02T00:00:00Z"), output);
    FAIL() << "an existing audit was overwritten without --force";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("audit.json: file exists; use --force"), std::string::npos)
        << error.what();
  }
  EXPECT_EQ(testing::ReadText(output.folder / "audit.json"), before);
  EXPECT_EQ(FolderListing(output.folder), (std::set<std::string>{"audit.json"})) << "no temporary file left";
  output.overwrite = true;
  WriteAuditDocument(run, CreatedAt("2026-02-02T00:00:00Z"), output);
  EXPECT_NE(testing::ReadText(output.folder / "audit.json"), before);
}

TEST(AuditWriting, AnOutputFolderThatCannotBeCreatedLeavesNothing) {
  TempDir dir;
  const RunResult run = RunLaptops(dir);
  dir.Write("not-a-folder", "plain file\n");
  const auto listing = FolderListing(dir.path());
  AuditOutputOptions output;
  output.folder = dir.path() / "not-a-folder" / "out";
  try {
    WriteAuditDocument(run, {}, output);
    FAIL() << "wrote into a folder under a regular file";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("not-a-folder/out: cannot create the output folder"),
              std::string::npos)
        << error.what();
  }
  EXPECT_EQ(FolderListing(dir.path()), listing);
  EXPECT_EQ(testing::ReadText(dir.path() / "not-a-folder"), "plain file\n");
}

TEST(AuditWriting, AFullDiskLeavesNoPartialFile) {
  // A full disk simulated with a file-size limit (ulimit -f) in a child process: write(2) fails
  // with EFBIG once SIGXFSZ is ignored. Tests run as root, so permissions cannot simulate it.
  TempDir dir;
  const RunResult run = RunLaptops(dir);
  const auto folder = dir.path() / "out";
  std::filesystem::create_directory(folder);
  dir.Write("out/keep.txt", "already here\n");
  const auto message_file = dir.path() / "message.txt";
  const pid_t child = fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    signal(SIGXFSZ, SIG_IGN);
    struct rlimit limit {};
    limit.rlim_cur = limit.rlim_max = 1024;  // bytes; the audit is far larger
    setrlimit(RLIMIT_FSIZE, &limit);
    int status = 0;
    std::string message = "no error";
    try {
      AuditOutputOptions output;
      output.folder = folder;
      WriteAuditDocument(run, {}, output);
    } catch (const InputError& error) {
      message = error.what();
      status = 7;
    } catch (...) {
      status = 8;
    }
    limit.rlim_cur = RLIM_INFINITY;
    setrlimit(RLIMIT_FSIZE, &limit);  // only lowering the hard limit is final; the soft one returns
    FILE* out = std::fopen(message_file.c_str(), "w");
    if (out != nullptr) {
      std::fputs(message.c_str(), out);
      std::fclose(out);
    }
    _exit(status);
  }
  int status = 0;
  waitpid(child, &status, 0);
  ASSERT_TRUE(WIFEXITED(status));
  EXPECT_EQ(WEXITSTATUS(status), 7) << "the write must fail with InputError";
  const std::string message = testing::ReadText(message_file);
  EXPECT_NE(message.find("audit.json: cannot write: File too large"), std::string::npos) << message;
  EXPECT_EQ(FolderListing(folder), (std::set<std::string>{"keep.txt"})) << "no partial or temporary file";
}

TEST(AuditWriting, AMissingSigningKeyFailsBeforeAnythingIsWritten) {
  TempDir dir;
  const RunResult run = RunLaptops(dir);
  AuditOutputOptions output;
  output.folder = dir.path() / "out";
  output.sign_key = dir.path() / "no-such-key.pem";
  EXPECT_THROW(WriteAuditDocument(run, {}, output), InputError);
  EXPECT_FALSE(std::filesystem::exists(output.folder));
}

TEST(AuditReading, NamesTheProblemOfAnUnreadableAudit) {
  TempDir dir;
  const auto broken = dir.Write("broken.json", "{\n  \"format\": \"stepledger-audit\",\n  oops\n}\n");
  try {
    ReadAuditFile(broken);
    FAIL();
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("broken.json:3:"), std::string::npos) << error.what();
  }
  const auto other = dir.Write("other.json", "{\"format\": \"something-else\"}");
  EXPECT_THROW(ReadAuditFile(other), InputError);
  const auto newer = dir.Write("newer.json", "{\"format\": \"stepledger-audit\", \"format_version\": 9}");
  try {
    ReadAuditFile(newer);
    FAIL();
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("format_version"), std::string::npos) << error.what();
  }
  const auto older = dir.Write("older.json", "{\"format\": \"stepledger-audit\", \"format_version\": 0}");
  try {
    ReadAuditFile(older);
    FAIL();
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("'format_version': 0 is not a version this tool reads (1 to 4)"),
              std::string::npos) << error.what();
  }
  // 2^64 - 1 is newer than any version, not -1 (the unsigned value is compared as it is).
  const auto huge = dir.Write("huge.json", "{\"format\": \"stepledger-audit\", \"format_version\": 18446744073709551615}");
  try {
    ReadAuditFile(huge);
    FAIL();
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("'format_version': 18446744073709551615 is newer than this tool reads (4)"),
              std::string::npos) << error.what();
  }
  EXPECT_THROW(ReadAuditFile(dir.path() / "absent.json"), InputError);
}

// Keys whose numbers count things (rows, columns, degrees of freedom, levels, steps). JSON
// readers in other languages tell 229 from 229.0; a count is never written as a float.
bool IsCountKey(const std::string& key) {
  static const std::set<std::string> kCountKeys = {
      "bytes", "count", "design_columns", "df", "df_residual", "fingerprint_block_bytes", "index",
      "k", "max_leverage_line", "max_unit_leverage_line", "missing", "n", "present", "rank",
      "refinement_passes", "rows", "rows_read", "rows_used", "size", "step_count",
      "subsets_evaluated", "subset_nodes", "threads", "candidate_terms", "max_refinement_passes"};
  return kCountKeys.count(key) > 0;
}

void ExpectCountsAreIntegers(const json& value, const std::string& path) {
  if (value.is_object()) {
    for (const auto& [key, child] : value.items()) {
      const std::string child_path = path + "." + key;
      if (IsCountKey(key) && child.is_number()) {
        EXPECT_TRUE(child.is_number_integer()) << child_path << " = " << child.dump();
      }
      ExpectCountsAreIntegers(child, child_path);
    }
  } else if (value.is_array()) {
    for (std::size_t i = 0; i < value.size(); ++i) ExpectCountsAreIntegers(value[i], path + "[" + std::to_string(i) + "]");
  }
}

TEST(AuditDocument, EveryCountIsAJsonInteger) {
  // The format_version 1 fixture's data and plan: weighted, with rows dropped for two reasons,
  // categorical terms and a product, so that every kind of count is written.
  const auto fixture = testing::SourceDir() / "tests" / "audit" / "format_v1";
  const std::string plan = testing::ReadText(fixture / "plan.json");
  for (const char* method : {"stepwise", "all-subsets", "none"}) {
    SCOPED_TRACE(method);
    std::string plan_text = plan;
    plan_text.replace(plan_text.find("\"stepwise\""), 10, "\"" + std::string(method) + "\"");
    json document =
        BuildAuditDocument(RunPlan(fixture / "laptops_small.csv", ParsePlanText(plan_text), {}));
    SealAuditDocument(document);
    ExpectCountsAreIntegers(document, "");
    // Spot checks of the ones format_version 1 wrote as floats.
    EXPECT_TRUE(document["model"]["df_residual"].is_number_integer());
    EXPECT_TRUE(document["model"]["anova"]["residual"]["df"].is_number_integer());
    EXPECT_TRUE(document["search"]["n"].is_number_integer());
  }
}

}  // namespace
}  // namespace stepledger

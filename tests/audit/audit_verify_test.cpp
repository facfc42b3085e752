// Verification of audits: every kind of tampering is caught and named, controls show that the
// checks are not vacuous, and a replay on the data finds the first divergence.

#include "stepledger/audit/audit_verify.h"

#include <algorithm>
#include <cctype>
#include <optional>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/audit/jws.h"
#include "stepledger/audit/replay.h"
#include "stepledger/audit/signature.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using Check = VerifyReport::Check;

class AuditVerify : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = new testing::TempDir();
    data_ = folder_->Write("laptops.csv", testing::LaptopCsv());
    sealed_ = new json(BuildAuditDocument(RunPlan(data_, ParsePlanText(testing::LaptopPlan()), {})));
    SealAuditDocument(*sealed_);
  }
  static void TearDownTestSuite() {
    delete sealed_;
    delete folder_;
  }
  static std::string FirstProblem(const json& document) {
    const VerifyReport report = CheckAuditIntegrity(document);
    return report.problems.empty() ? std::string("(none)") : report.problems.front();
  }
  static testing::TempDir* folder_;
  static std::filesystem::path data_;
  static json* sealed_;
};
testing::TempDir* AuditVerify::folder_ = nullptr;
std::filesystem::path AuditVerify::data_;
json* AuditVerify::sealed_ = nullptr;

TEST_F(AuditVerify, AnUntamperedAuditHolds) {
  const VerifyReport report = CheckAuditIntegrity(*sealed_);
  EXPECT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_EQ(report.chain, Check::kHolds);
  EXPECT_EQ(report.sections, Check::kHolds);
  EXPECT_EQ(report.seal, Check::kHolds);
  EXPECT_EQ(report.signature, Check::kNotRun);
}

TEST_F(AuditVerify, ANumberInACandidateTableIsNamedByItsStep) {
  json tampered = *sealed_;
  json& rss = tampered["steps"][1]["candidates"][0]["rss"];
  rss = rss.get<double>() * 1.000001;
  EXPECT_EQ(FirstProblem(tampered).rfind("step 1 [", 0), 0u) << FirstProblem(tampered);
  EXPECT_NE(FirstProblem(tampered).find("digest does not match"), std::string::npos);
}

TEST_F(AuditVerify, AReorderedStepIsNamed) {
  json tampered = *sealed_;
  std::swap(tampered["steps"][1], tampered["steps"][2]);
  const std::string problem = FirstProblem(tampered);
  EXPECT_NE(problem.find("step 1 (recorded index 2)"), std::string::npos) << problem;
  EXPECT_NE(problem.find("a step was moved or deleted"), std::string::npos) << problem;
}

TEST_F(AuditVerify, ADeletedStepIsNamed) {
  json tampered = *sealed_;
  tampered["steps"].erase(2);
  const std::string problem = FirstProblem(tampered);
  EXPECT_NE(problem.find("step 2 (recorded index 3)"), std::string::npos) << problem;

  json last_deleted = *sealed_;
  last_deleted["steps"].erase(last_deleted["steps"].size() - 1);
  const VerifyReport report = CheckAuditIntegrity(last_deleted);
  ASSERT_FALSE(report.Holds());
  EXPECT_NE(report.problems.front().find("a step was added or deleted"), std::string::npos)
      << report.problems.front();
}

TEST_F(AuditVerify, AnEditedPlanIsNamed) {
  json tampered = *sealed_;
  tampered["plan"]["normalised"]["entry_p"] = 0.2;
  EXPECT_EQ(FirstProblem(tampered), "key 'plan' does not match its digest: it was edited");
  // The chain starts from the plan: the genesis no longer matches either.
  const VerifyReport report = CheckAuditIntegrity(tampered);
  EXPECT_EQ(report.chain, Check::kFails);
}

// predict reads plan.normalised, a replay runs plan.verbatim: an edit of the normalised plan,
// re-sealed with the documented (unkeyed) algorithm as anyone can, must not verify, with or
// without the data (it did: predict then priced "age" from another column).
TEST_F(AuditVerify, AnEditedNormalisedPlanResealedIsNamedWithAndWithoutData) {
  EXPECT_EQ(CheckAuditIntegrity(*sealed_).plan, Check::kHolds) << "control: the untampered audit";
  json tampered = *sealed_;
  tampered["plan"]["normalised"]["terms"][0]["column"] = "battery_cycles";
  SealAuditDocument(tampered);
  const VerifyReport report = CheckAuditIntegrity(tampered);
  EXPECT_EQ(report.chain, Check::kHolds) << "the test re-sealed it correctly";
  EXPECT_EQ(report.sections, Check::kHolds);
  EXPECT_EQ(report.seal, Check::kHolds);
  EXPECT_EQ(report.plan, Check::kFails);
  ASSERT_FALSE(report.Holds());
  EXPECT_EQ(report.problems.front().rfind("key 'plan.normalised.terms[0].column' is \"battery_cycles\" in the audit, "
                                          "\"age_months\" from plan.verbatim: ", 0),
            0u)
      << report.problems.front();

  VerifyOptions options;
  options.data = data_;
  const VerifyReport replayed = VerifyAudit(tampered, options);
  EXPECT_EQ(replayed.replay, Check::kFails) << replayed.FullReport();
  EXPECT_NE(std::find_if(replayed.problems.begin(), replayed.problems.end(),
                         [](const std::string& problem) {
                           return problem.rfind("replay differs: key 'plan.normalised.terms[0].column'", 0) == 0;
                         }),
            replayed.problems.end())
      << replayed.FullReport();

  // A number edited by a rounding-level amount is caught too: the plans compare exactly.
  json nudged = *sealed_;
  nudged["plan"]["normalised"]["entry_p"] = 0.05000000000000001;
  SealAuditDocument(nudged);
  EXPECT_EQ(CheckAuditIntegrity(nudged).plan, Check::kFails);
}

// An older audit's normalised plan may lack a key added since (max_levels): it reads at its
// default, and that is what the verbatim plan gives, so it holds; a value other than the
// verbatim one does not.
TEST_F(AuditVerify, AKeyTheNormalisedPlanLacksComparesAtItsDefault) {
  json older = *sealed_;
  older["plan"]["normalised"].erase("max_levels");
  SealAuditDocument(older);
  EXPECT_EQ(CheckAuditIntegrity(older).plan, Check::kHolds) << CheckAuditIntegrity(older).FullReport();
  json other = *sealed_;
  other["plan"]["normalised"]["max_levels"] = 50;
  SealAuditDocument(other);
  EXPECT_EQ(FirstProblem(other).rfind("key 'plan.normalised.max_levels' is 50 in the audit, 100 from plan.verbatim", 0), 0u)
      << FirstProblem(other);
  // A normalised plan the plan reader refuses is named with its key.
  json unknown = *sealed_;
  unknown["plan"]["normalised"]["colour"] = "red";
  SealAuditDocument(unknown);
  EXPECT_NE(FirstProblem(unknown).find("key 'plan.normalised.colour': unknown key"), std::string::npos)
      << FirstProblem(unknown);
}

// The seal does not cover the signature: with --public-key the key recorded in the audit must
// be the one given (a swapped key passed before), the signed header's kid must name it, and the
// signature must sign the seal.
class AuditSignature : public AuditVerify {
 protected:
  void SetUp() override {
    key_ = folder_->path() / "signer.pem";
    if (!std::filesystem::exists(key_) &&
        testing::RunCommand("openssl genpkey -algorithm ed25519 -out '" + key_.string() + "' 2>/dev/null") != 0) {
      GTEST_SKIP() << "openssl cannot make an Ed25519 key here";
    }
    signer_.emplace(Ed25519Signer::FromPemFile(key_));
    signed_ = *sealed_;
    SealAuditDocument(signed_, &*signer_);
  }
  // RFC 8032 §7.1 TEST 1's key (RFC 8037 A.1's): a valid key of someone else.
  static Ed25519Signer Other() {
    return Ed25519Signer::FromRawPrivateKeyHex("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60");
  }
  static constexpr const char* kOtherThumbprint = "kPrK_qmxVWaYVA9wwBF6Iuo3vVzz7TxHCTwXBygrS4k";
  std::string FirstProblemWithKey(const json& document) const {
    const VerifyReport report = CheckAuditIntegrity(document, key_);
    return report.problems.empty() ? std::string("(none)") : report.problems.front();
  }
  std::filesystem::path key_;
  std::optional<Ed25519Signer> signer_;
  json signed_;
};

TEST_F(AuditSignature, HoldsWithThePemOrTheJwkOfTheKeyAndWithout) {
  EXPECT_TRUE(CheckAuditIntegrity(signed_, key_).Holds()) << CheckAuditIntegrity(signed_, key_).FullReport();
  const auto jwk = folder_->Write("signer.jwk", Ed25519Jwk(signer_->PublicKey()).dump());
  const VerifyReport with_jwk = CheckAuditIntegrity(signed_, jwk);
  EXPECT_EQ(with_jwk.signature, Check::kHolds) << with_jwk.FullReport();
  EXPECT_NE(with_jwk.FullReport().find("signature verified against the public key " + jwk.string()), std::string::npos);
  const VerifyReport without = CheckAuditIntegrity(signed_);
  EXPECT_EQ(without.signature, Check::kHolds);
  EXPECT_NE(without.FullReport().find("give --public-key to check who signed"), std::string::npos);
  const SignatureCheck check = CheckAuditSignature(signed_);
  EXPECT_EQ(check.shape, SignatureCheck::Shape::kJws);
  EXPECT_EQ(check.key_label, "key thumbprint (RFC 7638) " + JwkThumbprint(signer_->PublicKey()));
}

TEST_F(AuditSignature, ASwappedJwkIsCaughtWithAndWithoutTheKey) {
  json swapped = signed_;
  swapped["signature"]["jwk"] = Ed25519Jwk(Other().PublicKey());
  EXPECT_EQ(FirstProblemWithKey(swapped).rfind(std::string("key 'signature.jwk' is the key with thumbprint ") +
                                                   kOtherThumbprint + ", not the public key in " + key_.string(),
                                               0),
            0u)
      << FirstProblemWithKey(swapped);
  EXPECT_EQ(FirstProblem(swapped).rfind(std::string("key 'signature.jwk' has the thumbprint ") + kOtherThumbprint +
                                            " (RFC 7638), not the protected header's kid",
                                        0),
            0u)
      << FirstProblem(swapped);
}

TEST_F(AuditSignature, AnotherSignerIsNamedByTheKid) {
  // An editor re-signs with their own key: the kid names their key, not the one given.
  json resigned = signed_;
  const Ed25519Signer other = Other();
  SealAuditDocument(resigned, &other);
  EXPECT_EQ(FirstProblemWithKey(resigned).rfind("key 'signature.jws': protected header 'kid' is \"kPrK_qmxVWaYVA9w...\", "
                                                "not the thumbprint of the public key in " + key_.string(),
                                                0),
            0u)
      << FirstProblemWithKey(resigned);
  EXPECT_EQ(FirstProblem(resigned), "(none)") << "control: as a record it holds (what the note warns of)";
  // ... and claims the signer's kid and key: the signature itself fails.
  json lying = signed_;
  const std::string header = AuditJwsProtectedHeader(signer_->PublicKey());
  lying["signature"]["jws"] = SignDetachedJws(other, header, lying["seal"].get<std::string>());
  EXPECT_EQ(FirstProblemWithKey(lying), "signature does not verify against the public key " + key_.string());
  EXPECT_EQ(FirstProblem(lying), "signature does not verify against the key recorded in the audit");
}

TEST_F(AuditSignature, MalformedJwsAreDifferencesNamingTheKey) {
  auto with_jws = [this](const std::string& jws) {
    json document = signed_;
    document["signature"]["jws"] = jws;
    return FirstProblem(document);
  };
  const std::string jws = signed_["signature"]["jws"].get<std::string>();
  const std::string encoded_header = jws.substr(0, jws.find('.'));
  const std::string seal = signed_["seal"].get<std::string>();
  EXPECT_EQ(with_jws(encoded_header + "." + Base64UrlEncode(seal) + jws.substr(jws.find('.') + 1))
                .rfind("key 'signature.jws' carries a payload part", 0),
            0u);
  EXPECT_EQ(with_jws(Base64UrlEncode(R"({"alg":"none"})") + "..").rfind("key 'signature.jws': protected header 'alg' is \"none\"", 0),
            0u);
  EXPECT_EQ(with_jws(jws + "==").rfind("key 'signature.jws' has a signature part that is not base64url", 0), 0u);
  EXPECT_EQ(with_jws("abc").rfind("key 'signature.jws' is not a JWS compact serialisation", 0), 0u);
  const std::string with_crit = SignDetachedJws(
      *signer_, R"({"alg":"EdDSA","b64":false,"crit":["b64"],"kid":")" + JwkThumbprint(signer_->PublicKey()) + "\"}", seal);
  EXPECT_EQ(with_jws(with_crit).rfind("key 'signature.jws': protected header 'crit'", 0), 0u) << with_jws(with_crit);
  // The header as written is what was signed: white space and another member order verify.
  const std::string spaced = SignDetachedJws(
      *signer_, "{ \"kid\": \"" + JwkThumbprint(signer_->PublicKey()) + "\", \"alg\": \"EdDSA\" }", seal);
  EXPECT_EQ(with_jws(spaced), "(none)");
  json other_message = signed_;
  other_message["signature"]["signed"] = "plan";
  EXPECT_EQ(FirstProblem(other_message).rfind("key 'signature.signed' is \"plan\"", 0), 0u) << FirstProblem(other_message);
  json bad_jwk = signed_;
  bad_jwk["signature"]["jwk"]["crv"] = "X25519";
  EXPECT_EQ(FirstProblem(bad_jwk).rfind("key 'signature.jwk.crv' is \"X25519\", expected \"Ed25519\"", 0), 0u)
      << FirstProblem(bad_jwk);
  // A signature of neither shape, or of the wrong types, is named, never a crash.
  json neither = signed_;
  neither["signature"] = {{"algorithm", 5}, {"value", "00"}};
  EXPECT_EQ(FirstProblem(neither).rfind("key 'signature' is neither a JWS {signed, jws, jwk}", 0), 0u) << FirstProblem(neither);
  json number_jws = signed_;
  number_jws["signature"]["jws"] = 7;
  EXPECT_EQ(FirstProblem(number_jws), "key 'signature.jws' is a number, expected a JWS compact serialisation (RFC 7515 §7.1)");
  json no_jwk = signed_;
  no_jwk["signature"].erase("jwk");
  EXPECT_EQ(FirstProblem(no_jwk).rfind("key 'signature.jwk' is missing", 0), 0u) << FirstProblem(no_jwk);
  // An edit after signing is caught by the signature as well as by the seal.
  json edited = signed_;
  edited["model"]["rss"] = 1.0;
  SealAuditDocument(edited);
  edited["signature"] = signed_["signature"];
  EXPECT_EQ(CheckAuditIntegrity(edited, key_).signature, Check::kFails);
}

TEST_F(AuditSignature, TheShapeOfVersionThreeIsRefusedInVersionFour) {
  json old_shape = signed_;
  const std::string seal = old_shape["seal"].get<std::string>();
  old_shape["signature"] = {{"algorithm", "ed25519"}, {"public_key", signer_->PublicKeyHex()}, {"signed", "seal"},
                            {"value", signer_->SignHex(seal)}};
  EXPECT_EQ(FirstProblemWithKey(old_shape).rfind("key 'signature' has the shape of format_version 3 and earlier", 0), 0u)
      << FirstProblemWithKey(old_shape);
  // Control: the same signature in an audit of format_version 3 verifies (the seal recomputed
  // over the old version number, as that build would have written it).
  json version_three = *sealed_;
  version_three["format_version"] = 3;
  SealAuditDocument(version_three);
  const std::string old_seal = version_three["seal"].get<std::string>();
  version_three["signature"] = {{"algorithm", "ed25519"}, {"public_key", signer_->PublicKeyHex()},
                                {"signed", "seal"}, {"value", signer_->SignHex(old_seal)}};
  EXPECT_EQ(CheckAuditIntegrity(version_three, key_).signature, Check::kHolds)
      << CheckAuditIntegrity(version_three, key_).FullReport();
  // Upper-case hex of the right key is the same key.
  std::string text = version_three["signature"]["public_key"].get<std::string>();
  for (char& c : text) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  version_three["signature"]["public_key"] = text;
  EXPECT_EQ(CheckAuditIntegrity(version_three, key_).signature, Check::kHolds);
}

TEST_F(AuditSignature, AKeyFileThatCannotBeUsedIsBadInput) {
  const auto rsa = folder_->Write("rsa.jwk", R"({"kty": "RSA", "n": "AQAB", "e": "AQAB"})");
  EXPECT_THROW(CheckAuditIntegrity(signed_, rsa), InputError);
  const auto hex = folder_->Write("key.hex", signer_->PublicKeyHex() + "\n");
  try {
    CheckAuditIntegrity(signed_, hex);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("is neither PEM"), std::string::npos) << error.what();
  }
}

// The recorded settings are honoured on replay: each is type- and range-checked, and the thread
// count is bounded by the cores here unless the caller says how many (100,000 recorded threads
// were started as asked).
TEST_F(AuditVerify, RecordedSettingsAreRangeCheckedAndThreadsBounded) {
  auto message_of = [](const json& settings) {
    try {
      RunOptionsFromSettings(settings, "a.json");
    } catch (const InputError& error) {
      return std::string(error.what());
    }
    return std::string();
  };
  EXPECT_EQ(message_of({{"threads", 100000}}), "a.json: key 'settings.threads': expected an integer from 1 to 256, found 100000");
  EXPECT_EQ(message_of({{"threads", 18446744073709551615u}}),
            "a.json: key 'settings.threads': expected an integer from 1 to 256, found 18446744073709551615");
  EXPECT_EQ(message_of({{"threads", 0}}), "a.json: key 'settings.threads': expected an integer from 1 to 256, found 0");
  EXPECT_EQ(message_of({{"threads", 2.0}}), "a.json: key 'settings.threads': expected an integer from 1 to 256, found 2.0");
  EXPECT_EQ(message_of({{"confidence_level", 2}}),
            "a.json: key 'settings.confidence_level': expected a number between 0 and 1 (exclusive), found 2");
  EXPECT_EQ(message_of({{"max_refinement_passes", 1000000}}),
            "a.json: key 'settings.max_refinement_passes': expected an integer from 0 to 100, found 1000000");
  EXPECT_EQ(message_of({{"delimiter", 5}}), "a.json: key 'settings.delimiter': expected a string, found number");
  EXPECT_EQ(message_of({{"delimiter", "\""}}).rfind("a.json: key 'settings.delimiter': expected one character", 0), 0u);
  EXPECT_EQ(message_of({{"diagnostics", "yes"}}), "a.json: key 'settings.diagnostics': expected true or false, found string");
  EXPECT_EQ(message_of({{"vif_caution", -1}}), "a.json: key 'settings.vif_caution': expected a number above 0, found -1");
  EXPECT_EQ(message_of(json::array()), "a.json: key 'settings': expected an object, found array");
  EXPECT_EQ(message_of((*sealed_)["settings"]), "") << "control: the recorded settings";
  EXPECT_EQ(RunOptionsFromSettings({{"threads", 3}, {"delimiter", ";"}}).threads, 3);

  json many = *sealed_;
  many["settings"]["threads"] = 256;
  EXPECT_EQ(ReplayRecordedPlan(many, data_, "audit").options.threads, std::min(256, CoresAvailable()));
  ReplayOverrides one;
  one.threads = 1;
  EXPECT_EQ(ReplayRecordedPlan(many, data_, "audit", one).options.threads, 1);
  // verify --data names an unusable setting as the reason the replay could not run.
  many["settings"]["threads"] = 100000;
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(many, options);
  EXPECT_EQ(report.replay, Check::kFails);
  EXPECT_NE(std::find_if(report.problems.begin(), report.problems.end(),
                         [](const std::string& problem) {
                           return problem.find("replay impossible: the recorded settings are unusable: audit: key "
                                               "'settings.threads'") == 0;
                         }),
            report.problems.end())
      << report.FullReport();
}

TEST_F(AuditVerify, AChangedFinalModelIsNamed) {
  json tampered = *sealed_;
  json& estimate = tampered["model"]["coefficients"][1]["estimate"];
  estimate = estimate.get<double>() + 1.0;
  EXPECT_EQ(FirstProblem(tampered), "key 'model' does not match its digest: it was edited");
}

TEST_F(AuditVerify, AnEditedTimeFieldBreaksTheSeal) {
  json tampered = *sealed_;
  tampered["created_at"] = "1999-01-01T00:00:00Z";
  EXPECT_EQ(FirstProblem(tampered).rfind("seal does not match", 0), 0u) << FirstProblem(tampered);
}

TEST_F(AuditVerify, ControlARecomputedSealStillFailsOnTheStepDigests) {
  // A verifier that only checked the seal would accept this file.
  json tampered = *sealed_;
  json& score = tampered["steps"][2]["candidates"][1]["score"];
  score = score.is_number() ? json(score.get<double>() - 3.0) : json(1.0);
  json unsealed = tampered;
  unsealed.erase("seal");
  tampered["seal"] = ToHex(Sha256(CanonicalJson(unsealed)));
  const VerifyReport report = CheckAuditIntegrity(tampered);
  EXPECT_EQ(report.seal, Check::kHolds) << "the test recomputed the seal correctly";
  EXPECT_EQ(report.chain, Check::kFails);
  ASSERT_FALSE(report.Holds());
  EXPECT_EQ(report.problems.front().rfind("step 2 [", 0), 0u) << report.problems.front();
}

TEST_F(AuditVerify, ControlAReorderedButIdenticalDocumentHolds) {
  // Digests cover content, not bytes: other key order and number spelling verify.
  const json reparsed = json::parse(sealed_->dump(7));
  EXPECT_TRUE(CheckAuditIntegrity(reparsed).Holds());
}

TEST_F(AuditVerify, ReplayOnTheOriginalDataHolds) {
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_EQ(report.fingerprint, Check::kHolds);
  EXPECT_EQ(report.replay, Check::kHolds);
}

TEST_F(AuditVerify, WithoutDataItSaysTheFingerprintAndReplayWereNotChecked) {
  const VerifyReport report = VerifyAudit(*sealed_, VerifyOptions{});
  ASSERT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_FALSE(report.DataChecked());
  const std::string text = report.FullReport();
  EXPECT_NE(text.find("data fingerprint and replay: NOT CHECKED"), std::string::npos) << text;
  EXPECT_NE(text.find("--data FILE"), std::string::npos) << "says how to check them: " << text;
  EXPECT_EQ(text.find("The audit holds.\n"), std::string::npos) << "no unqualified verdict: " << text;
  EXPECT_NE(text.find("the data it was made from were not checked"), std::string::npos) << text;
  const json result = report.ToJson();
  EXPECT_EQ(result["data_checked"], false);
  EXPECT_EQ(result["not_checked"], json({"fingerprint", "replay"}));
  EXPECT_NE(result["how_to_check"].get<std::string>().find("--data FILE"), std::string::npos);
}

TEST_F(AuditVerify, ControlWithDataNothingIsLeftUnchecked) {
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  ASSERT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_TRUE(report.DataChecked());
  EXPECT_EQ(report.FullReport().find("NOT CHECKED"), std::string::npos) << report.FullReport();
  EXPECT_NE(report.FullReport().find("The audit holds.\n"), std::string::npos);
  EXPECT_EQ(report.ToJson()["not_checked"], json::array());
  EXPECT_TRUE(report.ToJson()["how_to_check"].is_null());
}

TEST_F(AuditVerify, ReplayReportsAFingerprintMismatchOnAnyByteChange) {
  // The same values with other bytes (a trailing blank line is not a record): only the
  // fingerprint can tell.
  const auto changed = folder_->Write("laptops-bytes.csv", testing::LaptopCsv() + "\n");
  VerifyOptions options;
  options.data = changed;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_EQ(report.fingerprint, Check::kFails);
  EXPECT_EQ(report.replay, Check::kHolds) << report.FullReport();
  ASSERT_FALSE(report.Holds());
  EXPECT_EQ(report.problems.front().rfind("fingerprint mismatch: the data are not the bytes the audit "
                                          "was made from", 0),
            0u)
      << report.problems.front();
}

TEST_F(AuditVerify, ReplayNamesTheFirstStepWhereTheRouteDiverges) {
  // One row changed: a laptop with an absurd battery count and price makes battery_cycles
  // (no effect in the true model) look strong, so the route changes.
  std::string csv = testing::LaptopCsv();
  const std::size_t row_start = csv.find('\n') + 1;
  const std::size_t row_end = csv.find('\n', row_start);
  std::vector<std::string> cells;
  std::stringstream row(csv.substr(row_start, row_end - row_start));
  for (std::string cell; std::getline(row, cell, ',');) cells.push_back(cell);
  cells[4] = "90000";   // battery_cycles
  cells[6] = "60000";   // price
  std::string changed_row;
  for (const std::string& cell : cells) changed_row += (changed_row.empty() ? "" : ",") + cell;
  csv.replace(row_start, row_end - row_start, changed_row);
  const auto changed = folder_->Write("laptops-row.csv", csv);

  // The route on the changed data, run independently, says where the routes part.
  const json other = BuildAuditDocument(RunPlan(changed, ParsePlanText(testing::LaptopPlan()), {}));
  const AuditComparison comparison = CompareAudits(*sealed_, other);
  ASSERT_FALSE(comparison.route.same) << "the changed row must change the route";
  ASSERT_TRUE(comparison.route.first_difference_step.has_value());
  const std::size_t expected_step = *comparison.route.first_difference_step;

  VerifyOptions options;
  options.data = changed;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_EQ(report.fingerprint, Check::kFails);
  EXPECT_EQ(report.replay, Check::kFails);
  const auto route = std::find_if(report.problems.begin(), report.problems.end(), [](const std::string& p) {
    return p.rfind("route diverges at step ", 0) == 0;
  });
  ASSERT_NE(route, report.problems.end()) << report.FullReport();
  EXPECT_EQ(route->rfind("route diverges at step " + std::to_string(expected_step) + ":", 0), 0u) << *route;
}

TEST(JsonDifference, NamesTheKeyPathAndUsesTheRelativeTolerance) {
  const json a = {{"model", {{"coefficients", {{{"estimate", 1.0}}, {{"estimate", 2.0}}}}}}};
  json b = a;
  b["model"]["coefficients"][1]["estimate"] = 2.0 * (1 + 5e-10);
  EXPECT_FALSE(FirstJsonDifference(a, b, "", 1e-9).has_value()) << "within 1e-9 relative";
  b["model"]["coefficients"][1]["estimate"] = 2.0 * (1 + 5e-9);
  const auto difference = FirstJsonDifference(a, b, "", 1e-9);
  ASSERT_TRUE(difference.has_value());
  EXPECT_EQ(difference->rfind("key 'model.coefficients[1].estimate' is 2.0 in the audit", 0), 0u) << *difference;
  b = a;
  b["model"]["coefficients"][0]["name"] = "x";
  EXPECT_EQ(*FirstJsonDifference(a, b, "", 1e-9), "key 'model.coefficients[0].name' is missing in the audit");
}

// Comparing and stripping walk without the call stack's help past a fixed depth: a value built
// in memory 200,000 levels deep is reported, not crashed on.
TEST(JsonDifference, DeepValuesAreReportedNotCrashedOn) {
  json deep = json::array();
  for (int i = 0; i < 200000; ++i) {
    json outer = json::array();
    outer.push_back(std::move(deep));
    deep = std::move(outer);
  }
  const auto difference = FirstJsonDifference(deep, deep, "x", 0.0);
  ASSERT_TRUE(difference.has_value());
  EXPECT_NE(difference->find("nested deeper than 256 levels"), std::string::npos) << *difference;
  json with_wording = json::object();
  with_wording["message"] = "m";
  with_wording["a"] = std::move(deep);  // moved: nlohmann's copy recurses
  WithoutWording(with_wording);
  EXPECT_FALSE(with_wording.contains("message"));
  // Within the limit, equal values are equal.
  json shallow = json::array({json::array({1, {{"k", 2.0}}})});
  EXPECT_FALSE(FirstJsonDifference(shallow, shallow, "x", 0.0).has_value());
}

}  // namespace
}  // namespace stepledger

#include "stepledger/audit/audit_verify.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <set>
#include <sstream>

#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/audit/jws.h"
#include "stepledger/audit/replay.h"
#include "stepledger/audit/signature.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"

namespace stepledger {
namespace {

using json = nlohmann::json;
using Check = VerifyReport::Check;

std::string Shown(const json& value) {
  std::string text = value.dump();
  if (text.size() > 60) text = text.substr(0, 57) + "...";
  return text;
}

std::string StepLabel(const json& step, std::size_t position) {
  std::string label = "step " + std::to_string(position);
  if (!step.is_object()) return label;
  if (step.contains("index") && step["index"] != json(position)) {
    label += " (recorded index " + Shown(step["index"]) + ")";
  }
  if (step.contains("action") && step["action"].is_string()) {
    label += " [" + step["action"].get<std::string>();
    if (step.contains("term") && step["term"].is_string()) label += " " + step["term"].get<std::string>();
    label += "]";
  }
  return label;
}

std::string Hex(const std::string& text) { return ToHex(Sha256(text)); }

std::string LowerCase(std::string text) {
  for (char& c : text) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return text;
}

void CheckSections(const json& document, VerifyReport& report) {
  report.sections = Check::kHolds;
  const json* recorded = nullptr;
  if (document.contains("digests") && document["digests"].is_object() &&
      document["digests"].contains("sections") && document["digests"]["sections"].is_object()) {
    recorded = &document["digests"]["sections"];
  }
  if (recorded == nullptr) {
    report.sections = Check::kFails;
    report.problems.push_back("key 'digests.sections' is missing: the audit is not sealed");
    return;
  }
  std::set<std::string> keys;
  for (const std::string& key : DigestedSections(document)) keys.insert(key);
  for (auto it = recorded->begin(); it != recorded->end(); ++it) keys.insert(it.key());
  for (const std::string& key : keys) {
    if (!document.contains(key)) {
      report.sections = Check::kFails;
      report.problems.push_back("key '" + key + "' is missing but its digest is recorded");
      continue;
    }
    if (!recorded->contains(key)) {
      report.sections = Check::kFails;
      report.problems.push_back("key '" + key + "' was added after sealing (no digest recorded)");
      continue;
    }
    std::string actual;
    try {
      actual = Hex(CanonicalJson(document[key]));
    } catch (const InputError& error) {
      actual = std::string("unusable: ") + error.what();
    }
    if ((*recorded)[key] != json(actual)) {
      report.sections = Check::kFails;
      report.problems.push_back("key '" + key + "' does not match its digest: it was edited");
    }
  }
}

void CheckChain(const json& document, VerifyReport& report) {
  report.chain = Check::kHolds;
  if (!document.contains("steps") || !document["steps"].is_array()) {
    report.chain = Check::kFails;
    report.problems.push_back("key 'steps' is missing or not an array");
    return;
  }
  const json& steps = document["steps"];
  const json digests = document.contains("digests") ? document["digests"] : json::object();
  const std::string genesis = GenesisDigest(document);
  if (digests.contains("genesis") && digests["genesis"] != json(genesis)) {
    report.chain = Check::kFails;
    report.problems.push_back(
        "genesis digest does not match: key 'plan' or 'data' (where the chain starts) was edited");
  }
  // Each step is checked against the digest recorded for the one before it, so that an edit is
  // named at the step where it was made rather than at every later step.
  std::string previous = genesis;
  for (std::size_t position = 0; position < steps.size(); ++position) {
    const json& step = steps[position];
    const std::string label = StepLabel(step, position);
    if (!step.is_object() || !step.contains("digest") || !step["digest"].is_string()) {
      report.chain = Check::kFails;
      report.problems.push_back(label + " has no digest");
      previous.clear();
      continue;
    }
    std::string actual;
    try {
      actual = StepDigest(previous, step);
    } catch (const InputError& error) {
      actual.clear();
    }
    const std::string recorded = step["digest"].get<std::string>();
    if (actual != recorded) {
      report.chain = Check::kFails;
      std::string why = position == 0 ? "its content, the plan or the data changed"
                                      : "its content changed, or a step before it was moved or deleted";
      if (step.contains("index") && step["index"] != json(position)) {
        why = "a step was moved or deleted (recorded index " + Shown(step["index"]) + " at position " +
              std::to_string(position) + ")";
      }
      report.problems.push_back(label + " digest does not match: " + why);
    }
    previous = recorded;
  }
  if (digests.contains("step_count") && digests["step_count"] != json(steps.size())) {
    report.chain = Check::kFails;
    report.problems.push_back("key 'steps' has " + std::to_string(steps.size()) +
                              " steps but the digests record " + Shown(digests["step_count"]) +
                              ": a step was added or deleted");
  } else if (digests.contains("route") && digests["route"] != json(previous)) {
    report.chain = Check::kFails;
    report.problems.push_back("the last step's digest is not the recorded route digest: a step "
                              "was added or deleted at the end");
  }
  if (!digests.contains("genesis") || !digests.contains("route") || !digests.contains("step_count")) {
    report.chain = Check::kFails;
    report.problems.push_back("key 'digests' lacks genesis, route or step_count");
  }
}

void CheckSeal(const json& document, VerifyReport& report) {
  if (!document.contains("seal") || !document["seal"].is_string()) {
    report.seal = Check::kFails;
    report.problems.push_back("key 'seal' is missing");
    return;
  }
  std::string actual;
  try {
    actual = ComputeSeal(document);
  } catch (const InputError& error) {
    report.seal = Check::kFails;
    report.problems.push_back(std::string("seal cannot be computed: ") + error.what());
    return;
  }
  if (actual != document["seal"].get<std::string>()) {
    report.seal = Check::kFails;
    report.problems.push_back("seal does not match the document: something outside the steps "
                              "was edited, added or removed");
  } else {
    report.seal = Check::kHolds;
  }
}

SignatureCheck Fails(SignatureCheck check, std::string problem) {
  check.holds = false;
  check.problem = std::move(problem);
  return check;
}

std::string Short(const std::string& text) { return text.size() > 16 ? text.substr(0, 16) + "..." : text; }

std::string VerifiedAgainst(const std::string& given_name) {
  return "signature verified against the public key " + given_name + ": the holder of its private key signed this seal";
}

// Format_version 4 on: {signed, jws, jwk}.
SignatureCheck CheckJwsSignature(const json& signature, const std::string& seal, const Ed25519PublicKey* given,
                                 const std::string& given_name, SignatureCheck check) {
  const json& text = signature["jws"];
  if (!text.is_string()) {
    return Fails(check, "key 'signature.jws' is a " + std::string(text.type_name()) +
                            ", expected a JWS compact serialisation (RFC 7515 §7.1)");
  }
  CompactJws jws;
  try {
    jws = ParseCompactJws(text.get_ref<const std::string&>());
  } catch (const InputError& error) {
    return Fails(check, std::string("key 'signature.jws' ") + error.what());
  }
  if (!jws.encoded_payload.empty()) {
    return Fails(check, "key 'signature.jws' carries a payload part; the audit's JWS has its payload detached "
                        "(RFC 7515 Appendix F), the payload being the seal's hex text");
  }
  if (const std::string wrong = CheckJwsHeader(jws.header); !wrong.empty()) {
    return Fails(check, "key 'signature.jws': " + wrong);
  }
  const std::string kid = jws.header["kid"].get<std::string>();
  check.key_label = "key thumbprint (RFC 7638) " + kid;
  if (!signature.contains("jwk")) {
    return Fails(check, "key 'signature.jwk' is missing: the audit must record the public key that signed it");
  }
  std::optional<Ed25519PublicKey> recorded;
  std::string recorded_problem;
  try {
    recorded = Ed25519PublicKeyFromJwk(signature["jwk"], "", "signature.jwk.");
  } catch (const InputError& error) {
    recorded_problem = error.what();
  }
  if (given != nullptr) {
    const std::string thumbprint = JwkThumbprint(*given);
    if (kid != thumbprint) {
      return Fails(check, "key 'signature.jws': protected header 'kid' is \"" + Short(kid) +
                              "\", not the thumbprint of the public key in " + given_name + " (" + thumbprint +
                              "): another key signed the audit");
    }
    if (!VerifyJws(jws, seal, *given)) {
      return Fails(check, "signature does not verify against the public key " + given_name);
    }
    // The recorded key must be the given one: else the audit (and its report) could name
    // another signer than the one who signed it. Neither the seal nor the JWS covers `jwk`.
    if (!recorded) return Fails(check, recorded_problem);
    if (*recorded != *given) {
      return Fails(check, "key 'signature.jwk' is the key with thumbprint " + JwkThumbprint(*recorded) +
                              ", not the public key in " + given_name + " (" + thumbprint +
                              ") that made the signature: the audit names another signer");
    }
    check.holds = true;
    check.note = VerifiedAgainst(given_name);
    return check;
  }
  if (!recorded) return Fails(check, recorded_problem);
  if (JwkThumbprint(*recorded) != kid) {
    return Fails(check, "key 'signature.jwk' has the thumbprint " + JwkThumbprint(*recorded) +
                            " (RFC 7638), not the protected header's kid \"" + Short(kid) +
                            "\": the audit names another key than the one that signed");
  }
  if (!VerifyJws(jws, seal, *recorded)) {
    return Fails(check, "signature does not verify against the key recorded in the audit");
  }
  check.holds = true;
  check.note = "signature checked only against the public key recorded in the audit (thumbprint " + Short(kid) +
               "): give --public-key to check who signed";
  return check;
}

// Format_versions 1 to 3: {algorithm: "ed25519", public_key, signed, value}, hex.
SignatureCheck CheckHexSignature(const json& document, const json& signature, const std::string& seal,
                                 const Ed25519PublicKey* given, const std::string& given_name, SignatureCheck check) {
  // Read without conversion: a recorded version that is not a small integer is not 1 to 3.
  const json* version = document.contains("format_version") ? &document["format_version"] : nullptr;
  const bool version_three_or_earlier = version != nullptr && version->is_number_integer() &&
                                        (version->is_number_unsigned() ? version->get<std::uint64_t>() <= 3
                                                                       : version->get<std::int64_t>() <= 3);
  if (!version_three_or_earlier) {
    return Fails(check, "key 'signature' has the shape of format_version 3 and earlier {algorithm, public_key, "
                        "value}; an audit of format_version 4 or later carries a JWS (signature.jws)");
  }
  if (!signature.contains("value") || !signature["value"].is_string()) {
    return Fails(check, "key 'signature' is not an ed25519 signature {algorithm, public_key, value}");
  }
  const std::string value = signature["value"].get<std::string>();
  const json recorded = signature.value("public_key", json(nullptr));
  if (recorded.is_string()) check.key_label = "public key " + recorded.get<std::string>();
  if (given != nullptr) {
    const std::string hex = given->Hex();
    if (!VerifyEd25519WithRawKeyHex(hex, seal, value)) {
      return Fails(check, "signature does not verify against the public key " + given_name);
    }
    if (!recorded.is_string() || LowerCase(recorded.get<std::string>()) != hex) {
      return Fails(check, "key 'signature.public_key' is " + Shown(recorded) + ", not the public key in " +
                              given_name + " (" + hex.substr(0, 16) +
                              "...) that made the signature: the audit names another signer");
    }
    check.holds = true;
    check.note = VerifiedAgainst(given_name);
    return check;
  }
  const std::string embedded = recorded.is_string() ? recorded.get<std::string>() : std::string();
  bool holds = false;
  try {
    holds = VerifyEd25519WithRawKeyHex(embedded, seal, value);
  } catch (const InputError&) {
    holds = false;
  }
  if (!holds) return Fails(check, "signature does not verify against the key recorded in the audit");
  check.holds = true;
  check.note = "signature checked only against the public key recorded in the audit (" + embedded.substr(0, 16) +
               "...): give --public-key to check who signed";
  return check;
}

void CheckSignature(const json& document, const std::filesystem::path& public_key,
                    VerifyReport& report) {
  const bool present = document.contains("signature");
  if (!present) {
    if (!public_key.empty()) {
      report.signature = Check::kFails;
      report.problems.push_back("key 'signature' is missing: nothing to check against the public key " +
                                public_key.string());
    } else {
      report.notes.push_back("no signature: the digests and seal catch accidental and casual "
                             "edits only (anyone can recompute them)");
    }
    return;
  }
  // A key file that cannot be used is bad input (InputError, exit 2); anything wrong in the
  // audit's signature is a difference.
  std::optional<Ed25519PublicKey> given;
  if (!public_key.empty()) given = ReadEd25519PublicKeyFile(public_key);
  const SignatureCheck check = CheckAuditSignature(document, given ? &*given : nullptr, public_key.string());
  if (check.holds) {
    report.signature = Check::kHolds;
    report.notes.push_back(check.note);
  } else {
    report.signature = Check::kFails;
    report.problems.push_back(check.problem);
  }
}

// plan.normalised, read as predict reads it, against what plan.verbatim gives on the recorded
// columns. Both sides go through the plan reader, so keys an older audit leaves out compare at
// their defaults, and numbers compare exactly.
void CheckNormalisedPlan(const json& document, const InputLimits& limits, VerifyReport& report) {
  report.plan = Check::kHolds;
  json as_read, derived;
  try {
    as_read = NormalisedPlanAsRead(document, "audit", limits);
    derived = NormalisedPlanFromVerbatim(document, "audit", limits);
  } catch (const LimitError&) {
    throw;  // the command's limit, not the audit's fault: exit 2 saying how to raise it
  } catch (const InputError& error) {
    report.plan = Check::kFails;
    std::string reason = error.what();
    if (reason.rfind("audit: ", 0) == 0) reason.erase(0, 7);
    report.problems.push_back(reason + " (so the normalised plan cannot be checked against plan.verbatim)");
    return;
  }
  if (CanonicalJson(as_read) == CanonicalJson(derived)) return;
  report.plan = Check::kFails;
  const std::optional<std::string> difference =
      FirstJsonDifference(as_read, derived, "plan.normalised", 0.0, "in the audit", "from plan.verbatim");
  report.problems.push_back((difference ? *difference : std::string("key 'plan.normalised' differs")) +
                            ": plan.normalised is not what plan.verbatim gives on the recorded columns "
                            "(predict reads the one, a replay runs the other): it was edited");
}

// The validation section's structure: the typed reader names the first key that is not the
// contract's shape. An audit of an older format_version may have none.
void CheckValidationShape(const json& document, VerifyReport& report) {
  if (!document.contains("validation")) {
    if (document.value("format_version", kAuditFormatVersion) >= kAuditFormatVersion) {
      report.validation = Check::kFails;
      report.problems.push_back("key 'validation' is missing: an audit of this format_version records it");
    }
    return;
  }
  try {
    ValidationFromJson(document["validation"], "audit");
    report.validation = Check::kHolds;
  } catch (const InputError& error) {
    report.validation = Check::kFails;
    std::string reason = error.what();
    if (reason.rfind("audit: ", 0) == 0) reason.erase(0, 7);
    report.problems.push_back(reason);
  }
}

std::string DataFileForMessage(const DataSet& data) { return DescribeDataSet(data); }

// The parts of a replayed document compared with the recorded one, in the order of reporting.
const char* const kReplayedSections[] = {"search", "subsets", "model", "numerics", "prediction",
                                         "design", "data",    "cautions"};

}  // namespace

std::string SignatureCheck::Algorithm() const {
  switch (shape) {
    case Shape::kAbsent: return "none";
    case Shape::kJws: return "JWS EdDSA (Ed25519; RFC 7515, RFC 8037)";
    case Shape::kHex: return "ed25519 over the seal's hex text (format_version 3 and earlier)";
    case Shape::kUnknown: return "unknown";
  }
  return "unknown";
}

SignatureCheck CheckAuditSignature(const json& document, const Ed25519PublicKey* given, const std::string& given_name) {
  SignatureCheck check;
  if (!document.is_object() || !document.contains("signature")) return check;
  const json& signature = document["signature"];
  check.shape = SignatureCheck::Shape::kUnknown;
  if (!signature.is_object()) {
    return Fails(check, "key 'signature' is a " + std::string(signature.type_name()) + ", expected an object");
  }
  if (signature.contains("signed") && signature["signed"] != json("seal")) {
    return Fails(check, "key 'signature.signed' is " + Shown(signature["signed"]) +
                            ": this tool signs the seal (\"seal\")");
  }
  const std::string seal = document.contains("seal") && document["seal"].is_string()
                               ? document["seal"].get<std::string>()
                               : std::string();
  if (signature.contains("jws")) {
    check.shape = SignatureCheck::Shape::kJws;
    return CheckJwsSignature(signature, seal, given, given_name, check);
  }
  if (signature.contains("algorithm") && signature["algorithm"] == json("ed25519")) {
    check.shape = SignatureCheck::Shape::kHex;
    return CheckHexSignature(document, signature, seal, given, given_name, check);
  }
  return Fails(check, "key 'signature' is neither a JWS {signed, jws, jwk} nor an ed25519 signature "
                      "{algorithm, public_key, value} of format_version 3 and earlier");
}

const char* ToString(VerifyReport::Check check) {
  switch (check) {
    case Check::kNotRun: return "not run";
    case Check::kHolds: return "holds";
    case Check::kFails: return "FAILS";
  }
  return "?";
}

std::string VerifyReport::FullReport() const {
  std::ostringstream text;
  auto line = [&text](const char* name, Check check) {
    if (check == Check::kNotRun) return;
    text << "  " << name << ": " << ToString(check) << "\n";
  };
  text << "Checks:\n";
  line("step chain", chain);
  line("section digests", sections);
  line("seal", seal);
  line("signature", signature);
  line("normalised plan", plan);
  line("validation section", validation);
  line("fingerprint", fingerprint);
  line("replay", replay);
  if (!DataChecked()) text << "  data fingerprint and replay: NOT CHECKED (" << kHowToCheckData << ")\n";
  for (const std::string& note : notes) text << "Note: " << note << "\n";
  if (problems.empty()) {
    text << (DataChecked() ? "The audit holds.\n"
                           : "The audit holds as a record; the data it was made from were not checked.\n");
  } else {
    text << "The audit does NOT hold. First difference: " << problems.front() << "\n";
    for (std::size_t i = 1; i < problems.size(); ++i) text << "  also: " << problems[i] << "\n";
  }
  return text.str();
}

nlohmann::json VerifyReport::ToJson() const {
  return {{"holds", Holds()},
          {"checks",
           {{"chain", ToString(chain)},
            {"sections", ToString(sections)},
            {"seal", ToString(seal)},
            {"signature", ToString(signature)},
            {"normalised_plan", ToString(plan)},
            {"validation", ToString(validation)},
            {"fingerprint", ToString(fingerprint)},
            {"replay", ToString(replay)}}},
          {"problems", problems},
          {"notes", notes},
          {"data_checked", DataChecked()},
          {"not_checked", DataChecked() ? json::array() : json::array({"fingerprint", "replay"})},
          {"how_to_check", DataChecked() ? json(nullptr) : json(kHowToCheckData)}};
}

bool NumbersAgree(double a, double b, double relative_tolerance) {
  if (a == b) return true;
  return std::fabs(a - b) <= relative_tolerance * std::max(std::fabs(a), std::fabs(b));
}

namespace {

// Deeper than any audit (7 levels) or any document the JSON reader accepts (64); a value built in
// memory deeper than this is reported as a difference rather than walked.
constexpr std::size_t kMaxCompareDepth = 256;

std::optional<std::string> FirstDifference(const json& recorded, const json& replayed, const std::string& path,
                                           double relative_tolerance, const char* recorded_name,
                                           const char* replayed_name, std::size_t depth,
                                           bool exact_integers = false) {
  if (depth > kMaxCompareDepth) {
    return "key '" + path + "' is nested deeper than " + std::to_string(kMaxCompareDepth) + " levels: not compared";
  }
  auto differs = [&](const std::string& what) -> std::optional<std::string> {
    return "key '" + path + "' " + what;
  };
  if (recorded.is_number() && replayed.is_number()) {
    if (exact_integers && recorded.is_number_integer() && replayed.is_number_integer()) {
      if (recorded == replayed) return std::nullopt;
      return differs("is " + Shown(recorded) + " " + recorded_name + ", " + Shown(replayed) + " " + replayed_name);
    }
    if (NumbersAgree(recorded.get<double>(), replayed.get<double>(), relative_tolerance)) return std::nullopt;
    return differs("is " + Shown(recorded) + " " + recorded_name + ", " + Shown(replayed) + " " +
                   replayed_name);
  }
  if (recorded.type() != replayed.type()) {
    return differs("is " + Shown(recorded) + " " + recorded_name + ", " + Shown(replayed) + " " +
                   replayed_name);
  }
  if (recorded.is_object()) {
    std::set<std::string> keys;
    for (auto it = recorded.begin(); it != recorded.end(); ++it) keys.insert(it.key());
    for (auto it = replayed.begin(); it != replayed.end(); ++it) keys.insert(it.key());
    for (const std::string& key : keys) {
      const std::string child = path.empty() ? key : path + "." + key;
      if (!recorded.contains(key)) return "key '" + child + "' is missing " + recorded_name;
      if (!replayed.contains(key)) return "key '" + child + "' is missing " + replayed_name;
      if (auto difference = FirstDifference(recorded[key], replayed[key], child, relative_tolerance, recorded_name,
                                            replayed_name, depth + 1, exact_integers)) {
        return difference;
      }
    }
    return std::nullopt;
  }
  if (recorded.is_array()) {
    const std::size_t common = std::min(recorded.size(), replayed.size());
    for (std::size_t i = 0; i < common; ++i) {
      if (auto difference = FirstDifference(recorded[i], replayed[i], path + "[" + std::to_string(i) + "]",
                                            relative_tolerance, recorded_name, replayed_name, depth + 1,
                                            exact_integers)) {
        return difference;
      }
    }
    if (recorded.size() != replayed.size()) {
      return differs("has " + std::to_string(recorded.size()) + " entries " + recorded_name + ", " +
                     std::to_string(replayed.size()) + " " + replayed_name);
    }
    return std::nullopt;
  }
  if (recorded != replayed) {
    return differs("is " + Shown(recorded) + " " + recorded_name + ", " + Shown(replayed) + " " +
                   replayed_name);
  }
  return std::nullopt;
}

}  // namespace

std::optional<std::string> FirstJsonDifference(const json& recorded, const json& replayed, const std::string& path,
                                               double relative_tolerance, const char* recorded_name,
                                               const char* replayed_name) {
  return FirstDifference(recorded, replayed, path, relative_tolerance, recorded_name, replayed_name, 0);
}

std::optional<std::string> FirstValidationDifference(const json& recorded, const json& replayed,
                                                     double relative_tolerance) {
  return FirstDifference(recorded, replayed, "validation", relative_tolerance, "in the audit", "on replay", 0,
                         /*exact_integers=*/true);
}

VerifyReport CheckAuditIntegrity(const json& document, const std::filesystem::path& public_key,
                                 const InputLimits& limits) {
  VerifyReport report;
  if (!document.is_object()) {
    report.problems.push_back("the audit is not a JSON object");
    report.chain = report.sections = report.seal = Check::kFails;
    return report;
  }
  CheckSections(document, report);
  CheckChain(document, report);
  CheckSeal(document, report);
  CheckSignature(document, public_key, report);
  CheckNormalisedPlan(document, limits, report);
  CheckValidationShape(document, report);
  return report;
}

void WithoutRefinementRecord(json& document) {
  for (const char* section : {"model", "numerics"}) {
    if (!document.is_object() || !document.contains(section) || !document[section].is_object()) continue;
    for (const char* key : {"refinement_passes", "refinement_correction", "refinement_stop"}) {
      document[section].erase(key);
    }
  }
}

void WithoutWording(json& value) {
  static const char* const kWordingKeys[] = {"rule", "stop_rule", "message", "reason",
                                             "undefined_reason"};
  // An explicit stack: no nesting can exhaust the call stack.
  std::vector<json*> pending = {&value};
  while (!pending.empty()) {
    json& current = *pending.back();
    pending.pop_back();
    if (current.is_object()) {
      for (const char* key : kWordingKeys) current.erase(key);
      for (auto& [key, child] : current.items()) pending.push_back(&child);
    } else if (current.is_array()) {
      for (json& child : current) pending.push_back(&child);
    }
  }
}

namespace {

// The (name, sha256) of each file a data set's `files` lists; empty when the key is absent or
// not as the schema says (the structure checks name that).
std::vector<std::pair<std::string, std::string>> ListedFiles(const json* data) {
  std::vector<std::pair<std::string, std::string>> files;
  if (data == nullptr || !data->is_object() || !data->contains("files") || !(*data)["files"].is_array()) return files;
  for (const json& file : (*data)["files"]) {
    if (!file.is_object() || !file.contains("name") || !file["name"].is_string() || !file.contains("sha256") ||
        !file["sha256"].is_string()) {
      return {};
    }
    files.emplace_back(file["name"].get<std::string>(), file["sha256"].get<std::string>());
  }
  return files;
}

std::string NamesInOrder(const std::vector<std::pair<std::string, std::string>>& files) {
  std::string text;
  for (std::size_t i = 0; i < files.size(); ++i) text += (i == 0 ? "" : ", ") + files[i].first;
  return text;
}

// What differs between a recorded data set and the given one, when both list their files: the
// same files in another order, or the first file that is not the recorded one.
std::optional<std::string> DataSetDifference(const std::vector<std::pair<std::string, std::string>>& recorded,
                                             const std::vector<std::pair<std::string, std::string>>& given) {
  if (recorded.empty() || given.empty()) return std::nullopt;
  std::vector<std::string> recorded_sums, given_sums;
  for (const auto& file : recorded) recorded_sums.push_back(file.second);
  for (const auto& file : given) given_sums.push_back(file.second);
  std::sort(recorded_sums.begin(), recorded_sums.end());
  std::sort(given_sums.begin(), given_sums.end());
  if (recorded_sums == given_sums) {
    return "the data files are the recorded ones in another order (the audit read " + NamesInOrder(recorded) +
           "; given in the order " + NamesInOrder(given) +
           "); the order of a data set's files is part of its fingerprint and of its record indices: "
           "give them in the recorded order";
  }
  for (std::size_t i = 0; i < recorded.size() && i < given.size(); ++i) {
    if (recorded[i].second != given[i].second) {
      return "data file " + std::to_string(i + 1) + " (" + given[i].first + ", sha256 " + given[i].second.substr(0, 16) +
             "...) is not the recorded file " + std::to_string(i + 1) + " (" + recorded[i].first + ", sha256 " +
             recorded[i].second.substr(0, 16) + "...)";
    }
  }
  return "the audit read " + std::to_string(recorded.size()) + " data files (" + NamesInOrder(recorded) + "), " +
         std::to_string(given.size()) + " are given (" + NamesInOrder(given) + ")";
}

// Fingerprint: unreadable data is bad input (exit 2), a different file a difference.
// `actual` is the fingerprint the replay's scan took (or, when the replay could not run, one
// taken by reading the file); its problem is named before the replay's. actual_files: the given
// data set's files (name, sha256) in reading order, for saying which file differs.
void CheckFingerprint(const json& document, const DataSet& data, const std::string& actual,
                      const std::vector<std::pair<std::string, std::string>>& actual_files, VerifyReport& report) {
  const json data_section = document.value("data", json::object());
  const std::string recorded = data_section.is_object() ? data_section.value("sha256", std::string()) : std::string();
  if (actual == recorded) {
    report.fingerprint = Check::kHolds;
  } else {
    report.fingerprint = Check::kFails;
    std::string problem = "fingerprint mismatch: the data are not the bytes the audit was made from (" +
                          DataFileForMessage(data) + " has sha256 " + actual.substr(0, 16) +
                          "..., the audit records " + recorded.substr(0, 16) + "...)";
    const auto recorded_files = ListedFiles(&data_section);
    if (auto difference = DataSetDifference(recorded_files, actual_files)) problem += ": " + *difference;
    report.problems.insert(report.problems.begin(), problem);
  }
}

// Replays the recorded plan with the recorded settings and returns the document the replay
// would write; a plan or data that cannot be replayed is a failed replay check (no value).
std::optional<json> ReplayedDocument(const json& document, const VerifyOptions& options,
                                     VerifyReport& report) {
  report.replay = Check::kHolds;
  try {
    RunOptionsFromSettings(document.value("settings", json::object()), "audit");
  } catch (const InputError& error) {
    report.replay = Check::kFails;
    report.problems.push_back(std::string("replay impossible: the recorded settings are unusable: ") + error.what());
    return std::nullopt;
  }
  try {
    ReplayOverrides overrides;
    if (options.threads > 0) overrides.threads = options.threads;
    overrides.work_dir = options.work_dir;
    overrides.limits = options.limits;
    overrides.shares = options.shares;
    const RunResult run = ReplayRecordedPlan(document, options.data, "audit", overrides);
    AuditDocumentOptions document_options;
    document_options.created_at = document.value("created_at", std::string("unknown"));
    return BuildAuditDocument(run, document_options);
  } catch (const json::exception& error) {
    report.replay = Check::kFails;
    report.problems.push_back(std::string("replay impossible: the recorded plan is unusable: ") + error.what());
  } catch (const LimitError&) {
    throw;  // the replaying machine's limit, not a difference in the audit (exit 2)
  } catch (const PlanError& error) {
    report.replay = Check::kFails;
    report.problems.push_back(std::string("replay impossible: the recorded plan is unusable: ") + error.what());
  } catch (const InputError& error) {
    report.replay = Check::kFails;
    report.problems.push_back(std::string("replay failed on the data: ") + error.what());
  }
  return std::nullopt;
}

std::string MoveText(const json& step) {
  std::string text = step.is_object() && step.contains("action") && step["action"].is_string()
                         ? step["action"].get<std::string>()
                         : std::string("?");
  if (step.is_object() && step.contains("term") && step["term"].is_string()) {
    text += " " + step["term"].get<std::string>();
  }
  return "'" + text + "'";
}

// The route: the first step whose action or term differs, then the first step whose numbers
// (or any other content) differ; a changed row moves numbers from step 0 on, so the route
// divergence is named first.
void CompareReplayedRoute(const json& recorded_steps, const json& replayed_steps, double tolerance,
                          VerifyReport& report) {
  const std::size_t common = std::min(recorded_steps.size(), replayed_steps.size());
  std::optional<std::string> route_problem;
  for (std::size_t index = 0; index < common && !route_problem; ++index) {
    const json& a = recorded_steps[index];
    const json& b = replayed_steps[index];
    if (!a.is_object() || a.value("action", json(nullptr)) != b.value("action", json(nullptr)) ||
        a.value("term", json(nullptr)) != b.value("term", json(nullptr))) {
      route_problem = "route diverges at step " + std::to_string(index) + ": the audit has " +
                      MoveText(a) + ", the replay " + MoveText(b);
    }
  }
  if (!route_problem && recorded_steps.size() != replayed_steps.size()) {
    route_problem = "route diverges at step " + std::to_string(common) + ": the audit has " +
                    std::to_string(recorded_steps.size()) + " steps, the replay " +
                    std::to_string(replayed_steps.size());
  }
  std::optional<std::string> step_problem;
  for (std::size_t index = 0; index < common && !step_problem; ++index) {
    json recorded_step = recorded_steps[index];
    if (recorded_step.is_object()) recorded_step.erase("digest");
    if (auto difference = FirstJsonDifference(recorded_step, replayed_steps[index],
                                              "steps[" + std::to_string(index) + "]", tolerance)) {
      step_problem = "step " + std::to_string(index) + ": " + *difference;
    }
  }
  if (route_problem) {
    report.replay = Check::kFails;
    report.problems.push_back(*route_problem);
    if (step_problem) report.problems.push_back("content first differs at " + *step_problem);
  } else if (step_problem) {
    report.replay = Check::kFails;
    report.problems.push_back("same actions and terms, but content differs at " + *step_problem);
  }
}

// The sections outside the steps, in kReplayedSections order; only the first difference is named.
void CompareReplayedSections(const json& recorded_document, const json& replayed, double tolerance,
                             VerifyReport& report) {
  for (const char* section : kReplayedSections) {
    json recorded_section =
        recorded_document.contains(section) ? recorded_document[section] : json(nullptr);
    json replayed_section = replayed.contains(section) ? replayed[section] : json(nullptr);
    if (std::string(section) == "search") {
      // The work a search did (models read, nodes formed) describes the algorithm, not the
      // result: a later version may reach the same list with less. The seal covers the record.
      for (json* part : {&recorded_section, &replayed_section}) {
        if (part->is_object()) {
          part->erase("subsets_evaluated");
          part->erase("subset_nodes");
        }
      }
    }
    if (std::string(section) == "data") {
      // The file's name and bytes are checked by the fingerprint; a renamed copy replays alike.
      for (json* part : {&recorded_section, &replayed_section}) {
        if (part->is_object()) {
          part->erase("file");
          part->erase("sha256");
          part->erase("bytes");
          part->erase("encoding");
          part->erase("files");  // each file's name, bytes and fingerprint: the fingerprint's check
        }
      }
    }
    if (auto difference = FirstJsonDifference(recorded_section, replayed_section, section, tolerance)) {
      report.replay = Check::kFails;
      report.problems.push_back("replay differs: " + *difference);
      break;
    }
  }
}

// The validation section: counts exactly, other numbers within the tolerance. An audit of an older
// format_version made before validation existed has none: nothing to compare.
void CompareReplayedValidation(const json& recorded_document, const json& replayed, double tolerance,
                               VerifyReport& report) {
  if (!recorded_document.contains("validation")) return;  // named by the structure check if due
  const json replayed_validation = replayed.contains("validation") ? replayed["validation"] : json(nullptr);
  if (auto difference = FirstValidationDifference(recorded_document["validation"], replayed_validation, tolerance)) {
    report.replay = Check::kFails;
    report.problems.push_back("replay differs: " + *difference);
  }
}

// plan.normalised as predict reads it against the replay's normalisation of plan.verbatim on
// the data, exactly (the check without data compares it with the recorded columns).
void CompareReplayedPlan(const json& document, const json& replayed, VerifyReport& report) {
  json as_read;
  try {
    as_read = NormalisedPlanAsRead(document, "audit", InputLimits::Unlimited());
  } catch (const InputError&) {
    return;  // named by the normalised plan check
  }
  const json* plan = replayed.contains("plan") ? &replayed["plan"] : nullptr;
  if (plan == nullptr || !plan->contains("normalised")) return;
  if (auto difference = FirstJsonDifference(as_read, (*plan)["normalised"], "plan.normalised", 0.0)) {
    report.replay = Check::kFails;
    report.problems.push_back("replay differs: " + *difference);
  }
}

}  // namespace

VerifyReport VerifyAudit(const json& document, const VerifyOptions& options) {
  VerifyReport report = CheckAuditIntegrity(document, options.public_key, options.limits);
  if (options.data.inputs.empty() && !options.data.columns) return report;  // the report says what was not checked

  // One scan of the data: the replay's, which also takes the fingerprint.
  std::optional<json> replay = ReplayedDocument(document, options, report);
  const json* replayed_data = replay && replay->contains("data") ? &(*replay)["data"] : nullptr;
  std::string actual;
  std::vector<std::pair<std::string, std::string>> actual_files;
  if (replayed_data != nullptr && replayed_data->is_object()) {
    actual = replayed_data->value("sha256", std::string());
    actual_files = ListedFiles(replayed_data);
  } else {
    const DataSetFingerprints fingerprints = FingerprintDataSet(options.data);
    actual = fingerprints.sha256;
    if (fingerprints.files.size() > 1) {
      for (const DataFileRecord& file : fingerprints.files) actual_files.emplace_back(file.name, file.sha256);
    }
  }
  CheckFingerprint(document, options.data, actual, actual_files, report);
  if (!replay) return report;
  json& replayed = *replay;

  // The recorded content in today's names (an older format_version is translated), so that
  // a replay by this version compares like with like; the integrity checks above ran on the
  // document as recorded.
  json recorded_document = AuditInCurrentShape(document);
  // The wording of rules, reasons and cautions is this version's own (numbers in them follow the
  // number policy of the build): for an audit of an older format_version it is not compared.
  // Every number and name is, in the fields that hold them.
  const bool older_format =
      document.value("format_version", kAuditFormatVersion) < kAuditFormatVersion;
  if (older_format) {
    WithoutWording(recorded_document);
    WithoutWording(replayed);
  }
  WithoutRefinementRecord(recorded_document);
  WithoutRefinementRecord(replayed);
  const double tolerance = options.relative_tolerance;
  const json recorded_steps = recorded_document.value("steps", json::array());
  CompareReplayedRoute(recorded_steps, replayed["steps"], tolerance, report);
  CompareReplayedSections(recorded_document, replayed, tolerance, report);
  CompareReplayedValidation(recorded_document, replayed, tolerance, report);
  CompareReplayedPlan(document, replayed, report);
  return report;
}

}  // namespace stepledger

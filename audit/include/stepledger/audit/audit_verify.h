#pragma once
// Checking an audit (`stepledger verify`): the step chain, the section digests, the seal and
// the signature; and, given the data, the fingerprint and a replay of the recorded plan whose
// route is compared step by step with the recorded one.
//
// The normalised plan is checked against the verbatim one, with or without data: predict,
// report and compare read plan.normalised, a replay runs plan.verbatim, so an edit of the one
// that the seal was recomputed over would otherwise make predict price from a plan nothing
// replays. With data, the replay's own normalisation is compared with it too.
//
// Every check names the first place that does not hold: "step 3 digest does not match",
// "key 'model' does not match its digest", "fingerprint mismatch: the data are not the bytes the
// audit was made from", "route diverges at step 2: key 'steps[2].term' ...".
// What the checks prove: digests and seal are unkeyed, so they catch accidental and casual
// edits; anyone can recompute them. A signature checked against a public key obtained
// elsewhere (--public-key) shows who produced the file and that nobody recomputed the chain.
// Without data, the report says that the fingerprint and the replay were not checked.
// Audits of an older format_version verify too: the integrity checks run on the document as
// recorded, and the replay compares the recorded content read in today's names
// (AuditInCurrentShape, audit_format_versions.h).

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/limits.h"

namespace stepledger {

/// How to check what verify without data leaves unchecked (printed by FullReport and noted).
inline constexpr const char* kHowToCheckData =
    "give --data FILE (or the files or folder of a data set), the data the audit was made from, to check its fingerprint and replay the plan";

struct VerifyOptions {
  /// Ed25519 public key file the signature must verify against, PEM or a JWK (audit/jws.h,
  /// ReadEd25519PublicKeyFile); empty: the signature, when present, is checked against the key
  /// recorded in the audit (integrity only, not identity).
  std::filesystem::path public_key;
  /// Data file, files or folder (engine/data_set.h) to fingerprint and replay on; no input: no
  /// replay. A data set given in another order than the recorded one fails the fingerprint check
  /// with a message that says so.
  DataSet data;
  /// Threads of the replay's data pass (0: as recorded in settings).
  int threads = 0;
  /// Where the replay's typed spill goes; empty: the system temporary folder.
  std::filesystem::path work_dir;
  /// The replay's input limits (engine/limits.h). A replay over a limit is not a difference: the
  /// LimitError is thrown, not recorded as a failed check.
  InputLimits limits;
  /// Numbers in a replay agree when |a - b| <= relative_tolerance * max(|a|, |b|).
  /// Default 1e-9 (the contract); actions, terms and texts must match exactly.
  double relative_tolerance = 1e-9;
  /// The processes of a cluster run that share the replay's data (ReplayOverrides::shares);
  /// on all but process 0 VerifyAudit throws ShareServed once process 0 is done.
  ShareExchange* shares = nullptr;
};

/// The outcome of each check: a value type that starts at "not run".
struct VerifyReport {
  enum class Check { kNotRun, kHolds, kFails };
  Check chain = Check::kNotRun;        ///< step digests from the genesis (plan and data) on
  Check sections = Check::kNotRun;     ///< per-section digests
  Check seal = Check::kNotRun;
  Check signature = Check::kNotRun;    ///< not run when the audit has none and no key was given
  /// plan.normalised (what predict, report and compare read) is what plan.verbatim (what a
  /// replay runs) gives on the recorded columns
  Check plan = Check::kNotRun;
  /// The `validation` section reads as the contract's shape (types, ranges); with data the
  /// replay's validation is compared with it (under `replay`). Not run when an audit of an older
  /// format_version has none.
  Check validation = Check::kNotRun;
  Check fingerprint = Check::kNotRun;  ///< with data
  Check replay = Check::kNotRun;       ///< with data
  /// Problems, each naming its place; the first one is the first place that differs.
  std::vector<std::string> problems;
  /// Facts worth saying that are not problems (what was checked, against which key).
  std::vector<std::string> notes;
  /// True when every check that ran holds.
  bool Holds() const { return problems.empty(); }
  /// True when the data were checked (fingerprint and replay ran, --data). Without them the
  /// checks show only that the record is intact, not that it comes from a given data file;
  /// FullReport and ToJson ("data_checked", "not_checked") say so.
  bool DataChecked() const { return fingerprint != Check::kNotRun || replay != Check::kNotRun; }
  /// One line per check and per problem, for the terminal.
  std::string FullReport() const;
  nlohmann::json ToJson() const;
};
const char* ToString(VerifyReport::Check check);

/// The audit's `signature` checked on its own (verify and the report share it).
/// Format_version 4 on: {signed: "seal", jws, jwk}, a JWS with detached payload whose payload
/// is the seal's 64-character hex text (audit/jws.h); its protected header's `kid` must be the
/// RFC 7638 thumbprint of the key that verifies it and of `jwk`. Format_versions 1 to 3:
/// {algorithm: "ed25519", public_key, signed: "seal", value}, Ed25519 over the seal's hex text,
/// key and signature in hex; refused in an audit of format_version 4 or later.
struct SignatureCheck {
  enum class Shape { kAbsent, kJws, kHex, kUnknown };
  Shape shape = Shape::kAbsent;
  /// Whether the signature verifies (against the given key, else the recorded one) and every
  /// name of the key in the audit is that key.
  bool holds = false;
  /// Why it does not hold, naming the key ("key 'signature.jws': protected header 'kid' is ...").
  std::string problem;
  /// What a holding signature proves, for verify's notes.
  std::string note;
  /// How the audit names its signing key: "key thumbprint (RFC 7638) XYZ" or "public key HEX".
  std::string key_label;
  /// "JWS EdDSA (Ed25519)" or "ed25519 over the seal's hex text (format_version 3 and earlier)".
  std::string Algorithm() const;
};

/// Checks the signature of document against given (nullptr: the key the audit records;
/// given_name names the given key's file in messages). Never throws for content problems.
SignatureCheck CheckAuditSignature(const nlohmann::json& document, const Ed25519PublicKey* given = nullptr,
                                   const std::string& given_name = "");

/// Chain, section digests, seal, signature, the normalised plan and the validation section's
/// structure of a parsed audit. Never
/// throws for content problems (they are reported); throws InputError when the public key file
/// cannot be used. With a public key, the signature must verify against it and the key the
/// audit records (signature.jwk, or signature.public_key before format_version 4) must be that key. The recorded plan is read within limits: a plan past
/// one is a LimitError (exit 2 with the way to raise it), not a failed check.
VerifyReport CheckAuditIntegrity(const nlohmann::json& document,
                                 const std::filesystem::path& public_key = {},
                                 const InputLimits& limits = {});

/// CheckAuditIntegrity, then with options.data the fingerprint and the replay. The replay's
/// validation must equal the recorded one: counts (k, seeds, rows, folds, deciles, sizes,
/// replicates) exactly, other numbers within relative_tolerance; a difference names the key
/// ("validation.folds.per_fold[3].sse"). Throws
/// InputError when the data cannot be read or the recorded plan cannot be run on it.
VerifyReport VerifyAudit(const nlohmann::json& document, const VerifyOptions& options);

/// The first difference between two JSON values at path (numbers within relative_tolerance,
/// everything else exactly), as "key 'PATH': A in the audit, B on replay"; nullopt when equal.
std::optional<std::string> FirstJsonDifference(const nlohmann::json& recorded,
                                               const nlohmann::json& replayed,
                                               const std::string& path,
                                               double relative_tolerance,
                                               const char* recorded_name = "in the audit",
                                               const char* replayed_name = "on replay");

/// The first difference between a recorded and a replayed `validation` object: JSON integers
/// (counts and seeds) exactly, other numbers within relative_tolerance, texts exactly; as
/// "key 'validation.folds.per_fold[3].sse' is 12.5 in the audit, 12.7 on replay". nullopt when
/// they agree.
std::optional<std::string> FirstValidationDifference(const nlohmann::json& recorded,
                                                     const nlohmann::json& replayed,
                                                     double relative_tolerance);
/// Removes the texts for people — the keys rule, stop_rule, message, reason and
/// undefined_reason — everywhere in a document. A replay of an audit of an older format_version
/// compares without them: their wording (and the number policy inside them) is the build's own,
/// while every number and name they quote is compared in the fields that hold it.
void WithoutWording(nlohmann::json& document);

/// Removes refinement_passes, refinement_correction and refinement_stop from the model and
/// numerics sections. A replay compares without them: they record how the build reached the
/// result (a later build may refine in fewer passes, its last correction a different rounding-
/// level figure), while the result itself (estimates, SEs, RSS) is compared.
void WithoutRefinementRecord(nlohmann::json& document);

/// Numbers a and b agree to relative_tolerance (|a - b| <= tol * max(|a|, |b|)).
bool NumbersAgree(double a, double b, double relative_tolerance);

}  // namespace stepledger

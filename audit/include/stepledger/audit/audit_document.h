#pragma once
// The audit file (CONTRACT.md `audit.json`, DESIGN.md §6): one run of a plan on a data file,
// recorded so that a reviewer can see every step, prove that nothing was edited, and replay it.
//
// Shape (format "stepledger-audit", format_version 4; audit/schema/audit.schema.json; audits of
// format_version 1 to 3 still verify and are read through AuditInCurrentShape,
// audit/audit_format_versions.h):
//   format, format_version, tool {name, version, commit, build {compiler, blas, build_type}},
//   created_at, duration_seconds,                         <- the only fields that record time
//   plan {verbatim, normalised}, settings, data, design, search, steps, subsets?, model,
//   numerics, validation (audit/validation_json.h), cautions, parent?, comparison?, digests, seal, signature?
//
// Integrity (all SHA-256, lower-case hex, over the canonical JSON of audit/canonical_json.h,
// so they cover content, not bytes):
//   genesis        = H(Canonical({format, format_version, plan, data}))
//   steps[i].digest = H(previous digest hex + Canonical(steps[i] without "digest")),
//                    the previous digest of steps[0] being the genesis: the chain is tied to the
//                    plan and to the data's fingerprint;
//   digests        = {genesis, route (the last step digest), step_count, and one H(Canonical(x))
//                    per other top-level section x but the time fields}: they let `verify` name
//                    the section edited;
//   seal           = H(Canonical(document without "seal" and "signature"));
//   signature      = {signed: "seal", jws, jwk}: jws is a JWS (RFC 7515) in compact serialisation
//                    with detached payload (Appendix F: "HEADER..SIGNATURE"), alg EdDSA over
//                    Ed25519 (RFC 8037), protected header exactly {"alg":"EdDSA","kid":K} with K
//                    the RFC 7638 thumbprint of the key; the payload is the seal's text as
//                    written, its 64 lower-case hex ASCII characters; jwk is the public key
//                    {crv: "Ed25519", kty: "OKP", x} (audit/jws.h). Format_version 3 and
//                    earlier: Ed25519 over the same 64 characters, {algorithm: "ed25519",
//                    public_key, signed, value} in hex.
// Digests and the seal are unkeyed: they catch accidental and casual edits, not someone who
// recomputes them. Only a signature (or a seal kept elsewhere) shows who produced the file.
//
// Because the seal covers created_at and duration_seconds, two runs of the same plan on the
// same data differ in those two fields and therefore in seal and signature; every digest is
// identical.

#include <array>
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/audit/signature.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/profile.h"
#include "stepledger/run/cautions.h"
#include "stepledger/run/run_plan.h"
#include "stepledger/selection/search.h"

namespace stepledger {

inline constexpr std::string_view kAuditFormat = "stepledger-audit";
/// 2: design columns TERM=LEVEL, model.ss_regression, data.rows_dropped as a list of
/// {reason, column, rows}, counts as JSON integers (1 wrote TERM[LEVEL], model.ssr and an
/// object keyed by reason).
/// 3: the validation section (cross-validation, holdout, bootstrap); plan.normalised holds
/// holdout and bootstrap, and the seed's default is 1 (2 recorded 20261201, a seed that then did
/// nothing).
/// 4: the signature is a JWS with detached payload and the public key a JWK ({signed, jws, jwk});
/// 1 to 3 recorded {algorithm: "ed25519", public_key, signed, value} in hex. What is signed is
/// unchanged: the seal's 64 hex characters (inside the JWS signing input from 4 on). Also
/// plan.normalised holds subset_tolerance, and the search section records the all-subsets
/// search's nodes, its tolerance and the guarantee of its list (subset_nodes, subset_tolerance,
/// subset_guarantee).
inline constexpr int kAuditFormatVersion = 4;
/// Top-level fields that record time: they (and the seal and signature over them) are the only
/// fields in which two runs of the same plan on the same data with the same build differ.
inline constexpr std::array<std::string_view, 2> kAuditTimeFields = {"created_at",
                                                                     "duration_seconds"};
/// Fields derived from the time fields (they cover them).
inline constexpr std::array<std::string_view, 2> kAuditTimeDerivedFields = {"seal", "signature"};
/// File name of the audit inside an output folder.
inline constexpr std::string_view kAuditFileName = "audit.json";

/// Extra content of a document.
struct AuditDocumentOptions {
  /// UTC ISO 8601 ("2026-12-01T09:30:00Z"); empty: now.
  std::string created_at;
  /// rerun: {seal, created_at, data_sha256, ...} of the parent audit.
  std::optional<nlohmann::json> parent;
  /// rerun: the comparison with the parent (audit_compare.h).
  std::optional<nlohmann::json> comparison;
};

/// The cautions as the audit's `cautions` array: {kind, message, and the figures each quotes}.
nlohmann::json CautionsToJson(const std::vector<Caution>& cautions);

/// The unsealed document (no digests, seal or signature; step digests absent).
nlohmann::json BuildAuditDocument(const RunResult& run, const AuditDocumentOptions& options = {});

/// H(Canonical({format, format_version, plan, data})) of a document.
std::string GenesisDigest(const nlohmann::json& document);
/// H(previous_hex + Canonical(step without "digest")).
std::string StepDigest(std::string_view previous_hex, const nlohmann::json& step);
/// Top-level keys that `digests` covers one by one: every key but steps, digests, seal,
/// signature and the time fields (which the seal covers). Sorted.
std::vector<std::string> DigestedSections(const nlohmann::json& document);
/// H(Canonical(document without "seal" and "signature")).
std::string ComputeSeal(const nlohmann::json& document);

/// Fills every step's digest, `digests` and `seal`, and with a signer `signature`.
/// Any existing integrity fields are replaced.
void SealAuditDocument(nlohmann::json& document, const Ed25519Signer* signer = nullptr);

/// The file text: two-space indentation, keys sorted, a final newline.
std::string SerializeAudit(const nlohmann::json& document);

/// Reads and parses an audit file, as recorded (the integrity checks need it so). Throws
/// InputError naming the file (and line and column for malformed JSON) when it cannot be read,
/// is not JSON, is not a stepledger audit, or has a format_version this tool does not read
/// (kOldestAuditFormatVersion to kAuditFormatVersion). Interpret it through
/// AuditInCurrentShape (audit_format_versions.h), which reads every older version.
nlohmann::json ReadAuditFile(const std::filesystem::path& path);

/// Where and how an audit is written.
struct AuditOutputOptions {
  /// Output folder; it is created when missing (its parent must exist). audit.json goes in it.
  std::filesystem::path folder;
  /// Replace an existing audit.json (--force). Default: refuse, naming the file.
  bool overwrite = false;
  /// Ed25519 private key (PEM) to sign the seal with (--sign-key), as a JWS; empty: no signature.
  std::filesystem::path sign_key;
};

/// The key path of the first key or string of a document that is not UTF-8, or nullopt.
std::optional<std::string> FirstNonUtf8Text(const nlohmann::json& document);

/// Builds the document of a run, seals it and, with a sign_key (Ed25519 private key, PEM),
/// signs it: the one document that the audit file and the report are both made from.
/// Throws InputError when the key cannot be used, or naming the key of a text that is not UTF-8
/// (JSON cannot hold it; the data file's name is recorded with U+FFFD in place of bad bytes).
nlohmann::json BuildSealedAudit(const RunResult& run, const AuditDocumentOptions& document_options,
                                const std::filesystem::path& sign_key = {});

/// Writes DIR/audit.json (SerializeAudit of the sealed document) and the extra files (such as
/// report.html) as one unit (io/atomic_file.h WriteOutputFolder): every new file, or on any
/// failure the previous files untouched. Without overwrite an existing file is refused.
void WriteAuditFolder(const std::filesystem::path& folder, const nlohmann::json& sealed_document,
                      std::vector<OutputFile> extra_files, bool overwrite);

/// BuildSealedAudit, then WriteAuditFolder with audit.json alone. Returns the written document.
nlohmann::json WriteAuditDocument(const RunResult& run, const AuditDocumentOptions& document_options,
                                  const AuditOutputOptions& output);

/// Most threads an audit's `settings.threads` may record (the command line's --threads range).
/// A replay runs with no more threads than the machine has cores (ReplayRecordedPlan).
inline constexpr int kMaxRecordedThreads = 256;
/// Most refinement passes `settings.max_refinement_passes` may record (select --refine's range).
inline constexpr int kMaxRefinementPasses = 100;

/// The run options recorded under a document's `settings` (defaults for missing keys; null: all
/// defaults), so that a replay runs the way the original did. Every value is type- and
/// range-checked: throws InputError "SOURCE: key 'settings.threads': expected an integer from 1
/// to 256, found 100000".
RunOptions RunOptionsFromSettings(const nlohmann::json& settings, std::string_view source_name = "audit");

/// Current UTC time as ISO 8601 with seconds ("2026-12-01T09:30:00Z").
std::string UtcTimestamp();

}  // namespace stepledger

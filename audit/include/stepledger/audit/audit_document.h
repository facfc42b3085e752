#pragma once
// The audit file (CONTRACT.md `audit.json`, DESIGN.md §6): one run of a plan on a data file,
// recorded so that a reviewer can see every step, prove that nothing was edited, and replay it.
//
// Shape (format "stepledger-audit", format_version 2; audit/schema/audit.schema.json; audits of
// format_version 1 still verify and are read through AuditInCurrentShape,
// audit/audit_format_versions.h):
//   format, format_version, tool {name, version, commit, build {compiler, blas, build_type}},
//   created_at, duration_seconds,                         <- the only fields that record time
//   plan {verbatim, normalised}, settings, data, design, search, steps, subsets?, model,
//   numerics, cautions, parent?, comparison?, digests, seal, signature?
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
//   signature      = Ed25519 over the seal's hex text: {algorithm, public_key, value}.
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
#include "stepledger/audit/plan_file.h"
#include "stepledger/audit/signature.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/profile.h"
#include "stepledger/selection/search.h"

namespace stepledger {

inline constexpr std::string_view kAuditFormat = "stepledger-audit";
/// 2: design columns TERM=LEVEL, model.ss_regression, data.rows_dropped as a list of
/// {reason, column, rows}, counts as JSON integers (1 wrote TERM[LEVEL], model.ssr and an
/// object keyed by reason).
inline constexpr int kAuditFormatVersion = 2;
/// Top-level fields that record time: they (and the seal and signature over them) are the only
/// fields in which two runs of the same plan on the same data with the same build differ.
inline constexpr std::array<std::string_view, 2> kAuditTimeFields = {"created_at",
                                                                     "duration_seconds"};
/// Fields derived from the time fields (they cover them).
inline constexpr std::array<std::string_view, 2> kAuditTimeDerivedFields = {"seal", "signature"};
/// File name of the audit inside an output folder.
inline constexpr std::string_view kAuditFileName = "audit.json";

/// How a plan is run for an audit. Every field is recorded under `settings` so that a replay
/// runs the same way.
struct AuditRunOptions {
  /// Delimiter and block size of the reader; the missing tokens always come from the plan.
  CsvOptions csv;
  /// Threads folding the factor (>= 1). Default 1. Different counts agree to rounding only.
  int threads = 1;
  /// Confidence level, refinement and the kernel's alias tolerance of the final fit.
  FitOptions fit;
  /// VIF above which a final-model coefficient is named in the collinearity caution
  /// (common practice: 10).
  double vif_caution = 10;
  /// Run the per-row diagnostics pass (largest leverage, for the extrapolation caution).
  /// Default: yes (one more pass over the rows).
  bool diagnostics = true;
};

/// Everything one run produced: the value the audit document renders.
struct AuditRun {
  LoadedPlan plan;
  std::string data_file_name;       ///< the data file's name (no folder), for readers
  std::string data_sha256;          ///< DataFingerprint over every byte read
  std::uint64_t data_bytes = 0;
  DataProfile profile;
  Design design;
  RowAccounting accounting;
  SearchResult search;
  FitResult fit;
  std::optional<double> max_leverage;  ///< from the diagnostics pass, when run
  std::uint64_t max_leverage_line = 0;
  /// What pricing new rows needs (ranges, largest unit leverage, smearing factor); filled by
  /// the diagnostics pass, empty without it.
  PredictionSupport prediction_support;
  /// The per-row diagnostics of the final model, when the diagnostics pass ran (the report
  /// shows them; kept so that no second pass is needed).
  std::optional<DiagnosticsResult> diagnostics;
  AuditRunOptions options;
  double duration_seconds = 0;      ///< wall time of the run
};

/// Runs a plan on a data file the way every audited command does: profile, design, one factor
/// pass that also fingerprints the bytes, the search, the refined fit of the final model and
/// (optionally) its diagnostics. `select` runs through here too, so a replay takes the very
/// path the recorded run took. observer (optional) sees the search's events as they happen.
/// Throws InputError/PlanError for bad input.
AuditRun RunPlanForAudit(const std::filesystem::path& data, const LoadedPlan& plan,
                         const AuditRunOptions& options, SearchObserver* observer = nullptr);

/// The fingerprint of a file (engine/fingerprint.h) computed by reading it; throws InputError
/// naming the file when it cannot be read.
std::string FingerprintFile(const std::filesystem::path& path);

/// Extra content of a document.
struct AuditDocumentOptions {
  /// UTC ISO 8601 ("2026-12-01T09:30:00Z"); empty: now.
  std::string created_at;
  /// rerun: {seal, created_at, data_sha256, ...} of the parent audit.
  std::optional<nlohmann::json> parent;
  /// rerun: the comparison with the parent (audit_compare.h).
  std::optional<nlohmann::json> comparison;
};

/// The cautions of DESIGN.md that apply to this run, each {kind, message, ...details}.
nlohmann::json AuditCautions(const AuditRun& run);

/// The unsealed document (no digests, seal or signature; step digests absent).
nlohmann::json BuildAuditDocument(const AuditRun& run, const AuditDocumentOptions& options = {});

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
  /// Ed25519 private key (PEM) to sign the seal with (--sign-key); empty: no signature.
  std::filesystem::path sign_key;
};

/// Builds, seals (and signs) and writes DIR/audit.json atomically: on any failure nothing is
/// left behind and InputError says why. Returns the written document.
nlohmann::json WriteAuditDocument(const AuditRun& run, const AuditDocumentOptions& document_options,
                                  const AuditOutputOptions& output);

/// The run options recorded under a document's `settings` (defaults for missing keys), so
/// that a replay runs the way the original did.
AuditRunOptions RunOptionsFromSettings(const nlohmann::json& settings);

/// Current UTC time as ISO 8601 with seconds ("2026-12-01T09:30:00Z").
std::string UtcTimestamp();

}  // namespace stepledger

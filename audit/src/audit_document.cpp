#include "stepledger/audit/audit_document.h"

#include "audit_reader.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <fstream>
#include <numeric>
#include <sstream>
#include <system_error>

#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/audit/jws.h"
#include "stepledger/io/json_reader.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/route_json.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/utf8.h"
#include "stepledger/selection/criterion.h"

#ifndef STEPLEDGER_TOOL_VERSION
#define STEPLEDGER_TOOL_VERSION "unknown"
#endif
#ifndef STEPLEDGER_GIT_COMMIT
#define STEPLEDGER_GIT_COMMIT "unknown"
#endif
#ifndef STEPLEDGER_BUILD_COMPILER
#define STEPLEDGER_BUILD_COMPILER "unknown"
#endif
#ifndef STEPLEDGER_BUILD_BLAS
#define STEPLEDGER_BUILD_BLAS "unknown"
#endif
#ifndef STEPLEDGER_BUILD_TYPE
#define STEPLEDGER_BUILD_TYPE "unknown"
#endif

namespace stepledger {
namespace {

using json = nlohmann::json;

std::string Hex(std::string_view bytes) { return ToHex(Sha256(bytes)); }

json ToolJson() {
  return {{"name", "stepledger"},
          {"version", STEPLEDGER_TOOL_VERSION},
          {"commit", STEPLEDGER_GIT_COMMIT},
          {"build",
           {{"compiler", STEPLEDGER_BUILD_COMPILER},
            {"blas", STEPLEDGER_BUILD_BLAS},
            {"build_type", STEPLEDGER_BUILD_TYPE}}}};
}

json SettingsJson(const RunOptions& options) {
  return {{"delimiter", std::string(1, options.csv.delimiter)},
          {"threads", options.threads},
          {"confidence_level", options.fit.confidence_level},
          {"max_refinement_passes", options.fit.max_refinement_passes},
          {"refinement_tolerance", options.fit.refinement_tolerance},
          {"alias_tolerance", options.fit.kernel.alias_tolerance},
          {"vif_caution", options.vif_caution},
          {"diagnostics", options.diagnostics}};
}

json ColumnJson(const ColumnProfile& column) {
  json out{{"name", column.name},
           {"type", ToString(column.kind)},
           {"present", column.present},
           {"missing", column.missing}};
  const bool numeric = column.kind == ColumnKind::kNumeric;
  out["min"] = numeric ? NumberOrNull(column.min) : json(nullptr);
  out["max"] = numeric ? NumberOrNull(column.max) : json(nullptr);
  out["mean"] = numeric ? NumberOrNull(column.mean) : json(nullptr);
  out["sd"] = numeric ? NumberOrNull(column.sd) : json(nullptr);
  json levels = json::array();
  if (column.kind == ColumnKind::kCategorical) {
    for (const LevelCount& level : column.levels) {
      levels.push_back({{"level", level.level}, {"count", level.count}});
    }
  }
  out["levels"] = std::move(levels);
  out["too_many_levels"] = column.too_many_levels;
  return out;
}

json DataJson(const RunResult& run) {
  json columns = json::array();
  for (const ColumnProfile& column : run.profile.columns) columns.push_back(ColumnJson(column));
  // The file's name is for people (the fingerprint identifies the data): a name that is not
  // UTF-8 is recorded with U+FFFD in place of its bad bytes, before the seal covers it.
  json data{{"file", Utf8Replaced(run.data_file_name)},
          {"sha256", run.data_sha256},
          {"bytes", run.data_bytes},
          {"encoding", run.data_encoding},
          {"fingerprint_block_bytes", DataFingerprint::kBlockBytes},
          {"rows_read", run.accounting.rows_read},
          {"rows_used", run.accounting.rows_used},
          {"rows_dropped", RowsDroppedJson(run.accounting)},
          {"missing", run.plan.plan.missing_tokens},
          {"columns", std::move(columns)}};
  // Only a plan with a holdout sets rows aside: without one the key is absent, as in audits
  // made before holdouts existed.
  if (run.plan.plan.search.holdout) data["rows_held_out"] = run.accounting.rows_held_out;
  // Data in memory (the Python module's data frames): an optional key, absent for files.
  if (run.data_in_memory) data["source"] = "memory";
  // A data set (several files or a folder) lists its files in reading order; a single file's
  // audit has no such key, as before data sets existed.
  if (run.data_is_set) {
    json files = json::array();
    for (const DataFileRecord& file : run.data_files) {
      files.push_back({{"name", Utf8Replaced(file.name)},
                       {"bytes", file.bytes},
                       {"sha256", file.sha256},
                       {"encoding", file.encoding},
                       {"rows", file.rows}});
    }
    data["files"] = std::move(files);
  }
  return data;
}

json DesignJson(const Design& design) {
  json columns = json::array();
  for (const DesignColumn& column : design.columns) {
    columns.push_back({{"name", column.name},
                       {"term", column.term == kNoTerm ? std::string("intercept")
                                                       : design.terms[column.term].name}});
  }
  json terms = json::array();
  for (std::size_t index = 0; index < design.terms.size(); ++index) {
    const DesignTerm& term = design.terms[index];
    json column_names = json::array();
    for (std::size_t column : design.TermColumns(index)) column_names.push_back(design.columns[column].name);
    json parts = json::array();
    for (std::size_t part : term.parts) parts.push_back(design.terms[part].name);
    json entry{{"name", term.name},
               {"kind", ToString(term.kind)},
               {"columns", std::move(column_names)},
               {"parts", std::move(parts)}};
    entry["source_column"] = term.source_column.empty() ? json(nullptr) : json(term.source_column);
    if (term.kind == TermKind::kPower) entry["degree"] = term.degree;
    if (term.kind == TermKind::kCategorical) {
      entry["baseline"] = term.baseline;
      entry["levels"] = term.levels;
    }
    terms.push_back(std::move(entry));
  }
  json skipped = json::array();
  for (const auto& [term, reason] : design.skipped) skipped.push_back({{"term", term}, {"reason", reason}});
  return {{"response", design.response},
          {"response_transform", ToString(design.response_transform)},
          {"intercept", design.intercept},
          {"weights", design.weights ? json(*design.weights) : json(nullptr)},
          {"columns", std::move(columns)},
          {"terms", std::move(terms)},
          {"skipped", std::move(skipped)}};
}

json SearchJson(const SearchResult& search) {
  json excluded = json::array();
  for (const ExcludedTerm& term : search.excluded) {
    excluded.push_back({{"term", term.term}, {"reason", term.reason}});
  }
  return {{"method", ToString(search.method)},
          {"criterion", ToString(search.criterion)},
          {"outcome", ToString(search.outcome)},
          {"stop_rule", search.stop_rule},
          {"excluded", std::move(excluded)},
          {"final_terms", search.final_terms},
          {"final_criterion_value", NumberOrNull(search.final_criterion_value)},
          {"final_rss", NumberOrNull(search.final_rss)},
          {"n", CountJson(search.n)},
          {"tss", NumberOrNull(search.tss)},
          {"cp_sigma2", NumberOrNull(search.cp_sigma2)},
          {"subsets_evaluated", search.subsets_evaluated},
          {"subset_nodes", search.subset_nodes},
          {"subset_tolerance", search.subset_tolerance},
          {"subset_guarantee", search.method == Method::kAllSubsets ? json(search.SubsetGuarantee()) : json(nullptr)}};
}

json NumericsJson(const RunResult& run) {
  return {{"alias_tolerance", run.fit.alias_tolerance},
          {"rank", run.fit.k},
          {"design_columns", run.design.column_count()},
          {"aliased_columns", run.fit.aliased_columns},
          {"rcond", NumberOrNull(run.fit.rcond)},
          {"refinement_passes", run.fit.refinement_passes},
          {"refinement_correction", NumberOrNull(run.fit.refinement_correction)},
          {"refinement_stop", ToString(run.fit.refinement_stop)},
          {"refinement_tolerance", run.options.fit.refinement_tolerance},
          {"tie_relative_tolerance", kTieRelativeTolerance},
          {"replay_relative_tolerance", 1e-9}};
}

}  // namespace

std::string UtcTimestamp() {
  const std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm utc{};
  gmtime_r(&now, &utc);
  char buffer[32];
  std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return buffer;
}

json CautionsToJson(const std::vector<Caution>& cautions) {
  json array = json::array();
  for (const Caution& caution : cautions) {
    json entry{{"kind", ToString(caution.kind)}, {"message", caution.message}};
    switch (caution.kind) {
      case CautionKind::kPostSelectionInference:
        entry["candidate_terms"] = caution.candidate_terms.value_or(0);
        break;
      case CautionKind::kCollinearity:
        if (!caution.largest_vif_column.empty()) {
          entry["largest_vif"] = {{"column", caution.largest_vif_column},
                                  {"vif", NumberOrNull(caution.largest_vif)}};
        }
        entry["vif_threshold"] = NumberOrNull(caution.vif_threshold);
        entry["ties"] = caution.ties;
        break;
      case CautionKind::kExtrapolation: {
        json ranges = json::array();
        for (const QuotedRange& range : caution.ranges) {
          ranges.push_back({{"column", range.column},
                            {"min", NumberOrNull(range.min)},
                            {"max", NumberOrNull(range.max)},
                            {"over", range.over_rows_used ? "rows used" : "rows read"}});
        }
        entry["ranges"] = std::move(ranges);
        entry["max_leverage"] = NumberOrNull(caution.max_leverage);
        break;
      }
      case CautionKind::kExcludedTerms:
        entry["terms"] = caution.terms;
        break;
      case CautionKind::kSelectionStability: {
        json rare = json::array();
        for (const TermInclusion& term : caution.rarely_chosen) {
          rare.push_back({{"term", term.term}, {"frequency", NumberOrNull(term.frequency)}});
        }
        json pairs = json::array();
        for (const SubstitutePair& pair : caution.substitutes) pairs.push_back({{"first", pair.first}, {"second", pair.second}});
        entry["rarely_chosen"] = std::move(rare);
        entry["substitutes"] = std::move(pairs);
        entry["inclusion_threshold"] = kStableInclusionShare;
        entry["replicates"] = caution.replicates.value_or(0);
        break;
      }
      case CautionKind::kHoldoutError:
        entry["holdout_rmse"] = NumberOrNull(caution.holdout_rmse);
        entry["residual_sd"] = NumberOrNull(caution.residual_sd);
        entry["holdout_rows"] = caution.holdout_rows.value_or(0);
        entry["ratio_threshold"] = kHoldoutErrorRatio;
        break;
      case CautionKind::kAssociation:
      case CautionKind::kNoResidualDf:
        break;
    }
    array.push_back(std::move(entry));
  }
  return array;
}

json BuildAuditDocument(const RunResult& run, const AuditDocumentOptions& options) {
  json document;
  document["format"] = kAuditFormat;
  document["format_version"] = kAuditFormatVersion;
  document["tool"] = ToolJson();
  document["created_at"] = options.created_at.empty() ? UtcTimestamp() : options.created_at;
  document["duration_seconds"] = run.duration_seconds;
  document["plan"] = {{"verbatim", run.plan.verbatim},
                      {"normalised", PlanToJson(run.plan.plan, &run.design)}};
  document["settings"] = SettingsJson(run.options);
  // A cluster run names its processes and how they shared the data (an optional key: a replay
  // does not compare it, since any number of processes gives the same route and numbers).
  if (run.processes > 1) document["cluster"] = {{"processes", run.processes}, {"layout", run.layout}};
  document["data"] = DataJson(run);
  document["design"] = DesignJson(run.design);
  document["search"] = SearchJson(run.search);
  document["steps"] = json::array();
  for (const RouteStep& step : run.search.steps) document["steps"].push_back(StepToJson(step));
  if (run.search.method == Method::kAllSubsets) {
    document["subsets"] = json::array();
    for (const SubsetRecord& subset : run.search.subsets) document["subsets"].push_back(SubsetToJson(subset));
  }
  document["model"] = ModelToJson(run.fit);
  document["numerics"] = NumericsJson(run);
  document["prediction"] = PredictionSectionJson(run.fit, run.design, run.prediction_support, SetFileNames(run));
  document["validation"] = ValidationToJson(run.validation);
  document["cautions"] = CautionsToJson(ComputeCautions(run));
  if (options.parent) document["parent"] = *options.parent;
  if (options.comparison) document["comparison"] = *options.comparison;
  return document;
}

std::string GenesisDigest(const json& document) {
  json head = json::object();
  for (const char* key : {"format", "format_version", "plan", "data"}) {
    head[key] = document.contains(key) ? document.at(key) : json(nullptr);
  }
  return Hex(CanonicalJson(head));
}

std::string StepDigest(std::string_view previous_hex, const json& step) {
  json content = step;
  if (content.is_object()) content.erase("digest");
  std::string text(previous_hex);
  text += CanonicalJson(content);
  return Hex(text);
}

std::vector<std::string> DigestedSections(const json& document) {
  std::vector<std::string> keys;
  for (auto it = document.begin(); it != document.end(); ++it) {
    const std::string& key = it.key();
    if (key == "steps" || key == "digests" || key == "seal" || key == "signature") continue;
    // Time fields are covered by the seal only, so that the digests of two runs agree.
    if (std::find(kAuditTimeFields.begin(), kAuditTimeFields.end(), key) != kAuditTimeFields.end()) continue;
    keys.push_back(key);
  }
  std::sort(keys.begin(), keys.end());
  return keys;
}

std::string ComputeSeal(const json& document) {
  json content = document;
  content.erase("seal");
  content.erase("signature");
  return Hex(CanonicalJson(content));
}

void SealAuditDocument(json& document, const Ed25519Signer* signer) {
  document.erase("seal");
  document.erase("signature");
  document.erase("digests");
  const std::string genesis = GenesisDigest(document);
  std::string previous = genesis;
  json& steps = document["steps"];
  if (!steps.is_array()) steps = json::array();
  for (json& step : steps) {
    step["digest"] = StepDigest(previous, step);
    previous = step["digest"].get<std::string>();
  }
  json digests{{"genesis", genesis}, {"route", previous}, {"step_count", steps.size()}};
  json sections = json::object();
  for (const std::string& key : DigestedSections(document)) {
    sections[key] = Hex(CanonicalJson(document.at(key)));
  }
  digests["sections"] = std::move(sections);
  document["digests"] = std::move(digests);
  const std::string seal = ComputeSeal(document);
  document["seal"] = seal;
  if (signer != nullptr) {
    // A JWS with detached payload (audit/jws.h): the payload is the seal's text as written
    // above, so that any JOSE library given the audit's seal and this JWS can check it.
    const Ed25519PublicKey key = signer->PublicKey();
    document["signature"] = {{"jwk", Ed25519Jwk(key)},
                             {"jws", SignDetachedJws(*signer, AuditJwsProtectedHeader(key), seal)},
                             {"signed", "seal"}};
  }
}

std::string SerializeAudit(const json& document) { return document.dump(2) + "\n"; }

json ReadAuditFile(const std::filesystem::path& path) {
  std::error_code error;
  if (std::filesystem::is_directory(path, error)) {
    // `select --out DIR` writes DIR/audit.json; a reviewer often passes DIR.
    const std::filesystem::path inside = path / "audit.json";
    throw InputError("cannot open audit file '" + path.string() + "': it is a folder" +
                     (std::filesystem::is_regular_file(inside, error) ? "; its audit is '" + inside.string() + "'" : ""));
  }
  const json document = ParseStrictJson(ReadWholeFile(path, "audit file"), path.string());
  if (!document.is_object() || !document.contains("format") ||
      document["format"] != std::string(kAuditFormat)) {
    throw InputError(path.string() + ": not a stepledger audit (key 'format' is not \"" +
                     std::string(kAuditFormat) + "\")");
  }
  if (!document.contains("format_version") || !document["format_version"].is_number_integer()) {
    throw InputError(path.string() + ": key 'format_version': expected an integer");
  }
  // Compared without conversion first: an unsigned 2^64 - 1 must not read as -1.
  const json& version = document["format_version"];
  const bool newer = version.is_number_unsigned()
                         ? version.get<std::uint64_t>() > static_cast<std::uint64_t>(kAuditFormatVersion)
                         : version.get<std::int64_t>() > kAuditFormatVersion;
  if (newer) {
    throw InputError(path.string() + ": key 'format_version': " +
                     document["format_version"].dump() + " is newer than this tool reads (" +
                     std::to_string(kAuditFormatVersion) + ")");
  }
  if (document["format_version"].get<std::int64_t>() < kOldestAuditFormatVersion) {
    throw InputError(path.string() + ": key 'format_version': " + document["format_version"].dump() +
                     " is not a version this tool reads (" + std::to_string(kOldestAuditFormatVersion) +
                     " to " + std::to_string(kAuditFormatVersion) + ")");
  }
  return document;
}

std::optional<std::string> FirstNonUtf8Text(const json& document) {
  struct Pending {
    const json* value;
    std::string path;
  };
  std::vector<Pending> pending = {{&document, ""}};
  while (!pending.empty()) {
    const Pending item = std::move(pending.back());
    pending.pop_back();
    if (item.value->is_object()) {
      for (auto it = item.value->begin(); it != item.value->end(); ++it) {
        const std::string path = item.path.empty() ? it.key() : item.path + "." + it.key();
        if (FirstInvalidUtf8(it.key())) return path;
        pending.push_back({&it.value(), path});
      }
    } else if (item.value->is_array()) {
      for (std::size_t i = item.value->size(); i-- > 0;) {
        pending.push_back({&(*item.value)[i], item.path + "[" + std::to_string(i) + "]"});
      }
    } else if (item.value->is_string() && FirstInvalidUtf8(item.value->get_ref<const std::string&>())) {
      return item.path;
    }
  }
  return std::nullopt;
}

json BuildSealedAudit(const RunResult& run, const AuditDocumentOptions& document_options,
                      const std::filesystem::path& sign_key) {
  std::optional<Ed25519Signer> signer;
  if (!sign_key.empty()) signer.emplace(Ed25519Signer::FromPemFile(sign_key));
  json document = BuildAuditDocument(run, document_options);
  // JSON holds Unicode text only. The data's text is refused where it is read (engine/utf8.h);
  // anything else is refused here, before anything is sealed or written, naming the key.
  if (const std::optional<std::string> key = FirstNonUtf8Text(document)) {
    throw InputError("the audit cannot record key '" + *key +
                     "': its text is not UTF-8, and JSON holds Unicode text only");
  }
  SealAuditDocument(document, signer ? &*signer : nullptr);
  return document;
}

void WriteAuditFolder(const std::filesystem::path& folder, const json& sealed_document,
                      std::vector<OutputFile> extra_files, bool overwrite) {
  std::vector<OutputFile> files;
  files.push_back({std::string(kAuditFileName), SerializeAudit(sealed_document)});
  for (OutputFile& file : extra_files) files.push_back(std::move(file));
  WriteOutputFolder(folder.empty() ? std::filesystem::path(".") : folder, files,
                    AtomicWriteOptions{.overwrite = overwrite});
}

json WriteAuditDocument(const RunResult& run, const AuditDocumentOptions& document_options,
                        const AuditOutputOptions& output) {
  json document = BuildSealedAudit(run, document_options, output.sign_key);
  WriteAuditFolder(output.folder, document, {}, output.overwrite);
  return document;
}

RunOptions RunOptionsFromSettings(const json& settings, std::string_view source_name) {
  // Every value is range-checked: a replay honours them, so a (re-sealed) audit must not be able
  // to ask for 100,000 threads or a confidence level of 2. The ranges are those the command line
  // and RunOptions::Validate accept; a key an older audit lacks keeps its default.
  const audit_detail::AuditReader reader(source_name);
  RunOptions options;
  if (settings.is_null()) return options;
  if (!settings.is_object()) reader.Fail("settings", "expected an object, found " + std::string(settings.type_name()));
  using audit_detail::AuditReader;
  const auto has = [&settings](const char* key) { return AuditReader::Find(settings, key) != nullptr; };
  if (has("delimiter")) {
    const std::string delimiter = reader.String(settings, "settings", "delimiter");
    if (delimiter.size() != 1 || delimiter[0] == '"' || delimiter[0] == '\r' || delimiter[0] == '\n') {
      reader.Fail("settings.delimiter", "expected one character other than a double quote, CR or LF, found \"" +
                                            QuoteForMessage(delimiter) + "\"");
    }
    options.csv.delimiter = delimiter[0];
  }
  if (has("threads")) {
    options.threads = static_cast<int>(reader.Integer(settings, "settings", "threads", 1, kMaxRecordedThreads));
  }
  const auto in_open_unit_interval = [&](const char* key) {
    const double value = reader.Number(settings, "settings", key);
    if (!(value > 0 && value < 1)) {
      reader.Fail(std::string("settings.") + key, "expected a number between 0 and 1 (exclusive), found " +
                                                        CanonicalNumber(value));
    }
    return value;
  };
  if (has("confidence_level")) options.fit.confidence_level = in_open_unit_interval("confidence_level");
  if (has("max_refinement_passes")) {
    options.fit.max_refinement_passes =
        static_cast<int>(reader.Integer(settings, "settings", "max_refinement_passes", 0, kMaxRefinementPasses));
  }
  if (has("refinement_tolerance")) options.fit.refinement_tolerance = in_open_unit_interval("refinement_tolerance");
  if (has("alias_tolerance")) options.fit.kernel.alias_tolerance = in_open_unit_interval("alias_tolerance");
  if (has("vif_caution")) {
    options.vif_caution = reader.Number(settings, "settings", "vif_caution");
    if (!(options.vif_caution > 0)) {
      reader.Fail("settings.vif_caution", "expected a number above 0, found " + CanonicalNumber(options.vif_caution));
    }
  }
  if (has("diagnostics")) options.diagnostics = reader.Bool(settings, "settings", "diagnostics");
  return options;
}

}  // namespace stepledger

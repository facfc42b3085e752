#include "stepledger/audit/audit_document.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <fstream>
#include <numeric>
#include <sstream>
#include <system_error>

#include "stepledger/audit/atomic_file.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/route_json.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
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

std::string FormatShort(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.4g", value);
  return buffer;
}

json ToolJson() {
  return {{"name", "stepledger"},
          {"version", STEPLEDGER_TOOL_VERSION},
          {"commit", STEPLEDGER_GIT_COMMIT},
          {"build",
           {{"compiler", STEPLEDGER_BUILD_COMPILER},
            {"blas", STEPLEDGER_BUILD_BLAS},
            {"build_type", STEPLEDGER_BUILD_TYPE}}}};
}

json SettingsJson(const AuditRunOptions& options) {
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

json DataJson(const AuditRun& run) {
  json columns = json::array();
  for (const ColumnProfile& column : run.profile.columns) columns.push_back(ColumnJson(column));
  return {{"file", run.data_file_name},
          {"sha256", run.data_sha256},
          {"bytes", run.data_bytes},
          {"fingerprint_block_bytes", DataFingerprint::kBlockBytes},
          {"rows_read", run.accounting.rows_read},
          {"rows_used", run.accounting.rows_used},
          {"rows_dropped", RowsDroppedJson(run.accounting)},
          {"missing", run.plan.plan.missing_tokens},
          {"columns", std::move(columns)}};
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
          {"subsets_evaluated", search.subsets_evaluated}};
}

json NumericsJson(const AuditRun& run) {
  return {{"alias_tolerance", run.fit.alias_tolerance},
          {"rank", run.fit.k},
          {"design_columns", run.design.column_count()},
          {"aliased_columns", run.fit.aliased_columns},
          {"rcond", NumberOrNull(run.fit.rcond)},
          {"refinement_passes", run.fit.refinement_passes},
          {"refinement_correction", NumberOrNull(run.fit.refinement_correction)},
          {"refinement_tolerance", run.options.fit.refinement_tolerance},
          {"tie_relative_tolerance", kTieRelativeTolerance},
          {"replay_relative_tolerance", 1e-9}};
}

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
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

std::string FingerprintFile(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path.string() + ": cannot open the data file");
  DataFingerprint fingerprint;
  std::vector<char> buffer(1 << 16);
  while (in) {
    in.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    const std::streamsize got = in.gcount();
    if (got > 0) fingerprint.Update(std::string_view(buffer.data(), static_cast<std::size_t>(got)));
  }
  if (in.bad()) throw InputError(path.string() + ": read error");
  return fingerprint.Finish();
}

AuditRun RunPlanForAudit(const std::filesystem::path& data, const LoadedPlan& plan,
                         const AuditRunOptions& options, SearchObserver* observer) {
  const auto started = std::chrono::steady_clock::now();
  if (options.threads < 1) {
    throw InputError("threads: expected at least 1, got " + std::to_string(options.threads));
  }
  options.fit.Validate();
  AuditRun run;
  run.plan = plan;
  run.options = options;
  run.options.csv.missing_tokens = plan.plan.missing_tokens;
  run.data_file_name = data.filename().string();

  run.profile = ProfileCsv(data, run.options.csv);
  run.design = BuildDesign(plan.plan.design, run.profile);
  CheckPlanAgainstDesign(plan.plan, run.design);
  ValidateSearchOptions(plan.plan.search, run.design);

  PassOptions pass_options;
  pass_options.csv = run.options.csv;
  pass_options.threads = options.threads;
  DataFingerprint fingerprint;
  PassResult pass = RunFactorPass(data, run.design, pass_options,
                                  [&fingerprint](std::string_view bytes) { fingerprint.Update(bytes); });
  run.data_bytes = fingerprint.total_bytes();
  run.data_sha256 = fingerprint.Finish();
  run.accounting = pass.accounting;

  SearchRunOptions search_run;
  search_run.kernel = options.fit.kernel;
  run.search = RunSearch(pass.factor, run.design, plan.plan.search, observer, search_run);

  FitOptions fit_options = options.fit;
  fit_options.cp_sigma2 = run.search.cp_sigma2;
  const RowReplay replay = FileRowReplay(data, run.design, run.options.csv);
  run.fit = FitModel(pass.factor, run.design, run.search.final_term_indices, fit_options, &replay);
  if (options.diagnostics && run.fit.n > 0) {
    run.diagnostics = DiagnoseAndLearnSupport(run.fit, run.design, replay, run.prediction_support);
    for (const RowDiagnostic& row : run.diagnostics->rows) {
      if (!run.max_leverage || row.leverage > *run.max_leverage) {
        run.max_leverage = row.leverage;
        run.max_leverage_line = row.line;
      }
    }
  }
  run.duration_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return run;
}

json AuditCautions(const AuditRun& run) {
  json cautions = json::array();
  const SearchResult& search = run.search;
  const FitResult& fit = run.fit;

  if (search.method != Method::kNone) {
    const std::size_t candidates = run.design.terms.size();
    cautions.push_back(
        {{"kind", "post-selection-inference"},
         {"message",
          "The p-values, standard errors and confidence intervals of the selected model ignore "
          "the selection (" + std::string(ToString(search.method)) + " by " +
              ToString(search.criterion) + " over " + std::to_string(candidates) +
              " candidate terms) and are optimistic; judge the model on held-out data or by "
              "cross-validation."},
         {"candidate_terms", candidates}});
  }

  // Collinearity: the largest VIF of the final model, the ones above the threshold, and ties.
  const CoefficientEstimate* largest = nullptr;
  std::vector<std::string> high;
  for (const CoefficientEstimate& coefficient : fit.coefficients) {
    if (!coefficient.vif || !std::isfinite(*coefficient.vif)) continue;
    if (largest == nullptr || *coefficient.vif > *largest->vif) largest = &coefficient;
    if (*coefficient.vif > run.options.vif_caution) {
      high.push_back(coefficient.name + " (" + FormatShort(*coefficient.vif) + ")");
    }
  }
  std::vector<std::string> tied_steps;
  for (const RouteStep& step : search.steps) {
    if (!step.ties.empty()) {
      tied_steps.push_back("step " + std::to_string(step.index) + ": " + step.term + " tied with " +
                           JoinNames(step.ties));
    }
  }
  if (largest != nullptr || !tied_steps.empty()) {
    std::string message = "With correlated predictors the route is unstable: terms can trade "
                          "places on slightly different data.";
    if (largest != nullptr) {
      message += " Largest VIF in the final model: " + largest->name + " " +
                 FormatShort(*largest->vif) + ".";
    }
    if (!high.empty()) {
      message += " VIF above " + FormatShort(run.options.vif_caution) + ": " + JoinNames(high) + ".";
    }
    if (!tied_steps.empty()) message += " Ties broken by plan order: " + JoinNames(tied_steps) + ".";
    json caution{{"kind", "collinearity"}, {"message", message}};
    if (largest != nullptr) {
      caution["largest_vif"] = {{"column", largest->name}, {"vif", NumberOrNull(largest->vif)}};
    }
    caution["vif_threshold"] = run.options.vif_caution;
    caution["ties"] = tied_steps;
    cautions.push_back(std::move(caution));
  }

  // Extrapolation: the ranges of the source columns of the final terms, and the largest leverage.
  // Over the rows used when the diagnostics pass recorded them (the ranges predict checks: a
  // numeric term's values are the column's, a log term's bounds are exp of the recorded ones);
  // else over every row read (the profile), which can only be wider.
  auto range_over_rows_used = [&run](const std::string& column) -> std::optional<std::pair<double, double>> {
    const TermRange* log_range = nullptr;
    for (const TermRange& range : run.prediction_support.ranges) {
      if (range.column != column) continue;
      if (range.kind == TermKind::kNumeric) return std::pair{range.min, range.max};
      if (range.kind == TermKind::kLog) log_range = &range;
    }
    if (log_range != nullptr) return std::pair{std::exp(log_range->min), std::exp(log_range->max)};
    return std::nullopt;
  };
  json ranges = json::array();
  std::vector<std::string> seen;
  std::string range_text;
  for (std::size_t term_index : fit.term_indices) {
    const DesignTerm& term = run.design.terms[term_index];
    if (term.kind != TermKind::kNumeric && term.kind != TermKind::kPower &&
        term.kind != TermKind::kLog) {
      continue;
    }
    if (std::find(seen.begin(), seen.end(), term.source_column) != seen.end()) continue;
    seen.push_back(term.source_column);
    const ColumnProfile* column = run.profile.Find(term.source_column);
    if (column == nullptr) continue;
    const auto used = range_over_rows_used(column->name);
    const double low = used ? used->first : column->min;
    const double high = used ? used->second : column->max;
    ranges.push_back({{"column", column->name},
                      {"min", NumberOrNull(low)},
                      {"max", NumberOrNull(high)},
                      {"over", used ? "rows used" : "rows read"}});
    range_text += (range_text.empty() ? "" : ", ") + column->name + " " + FormatShort(low) + " to " +
                  FormatShort(high);
  }
  std::string extrapolation = "Predictions for rows outside the ranges of these data";
  if (!range_text.empty()) extrapolation += " (" + range_text + ")";
  if (run.max_leverage) {
    extrapolation += " or with leverage above " + FormatShort(*run.max_leverage) +
                     " (the largest here, line " + std::to_string(run.max_leverage_line) + ")";
  }
  extrapolation += " are extrapolations and are flagged.";
  cautions.push_back({{"kind", "extrapolation"},
                      {"message", extrapolation},
                      {"ranges", std::move(ranges)},
                      {"max_leverage", NumberOrNull(run.max_leverage)}});

  cautions.push_back(
      {{"kind", "association"},
       {"message",
        "A selected term is an association in these data, not a cause. In pricing, protected "
        "characteristics and their proxies must not be used; local law and professional "
        "standards govern."}});

  if (!search.excluded.empty() || !fit.aliased_columns.empty()) {
    std::vector<std::string> parts;
    for (const ExcludedTerm& term : search.excluded) parts.push_back(term.term + ": " + term.reason);
    for (const std::string& column : fit.aliased_columns) parts.push_back(column + ": aliased");
    cautions.push_back({{"kind", "excluded-terms"},
                        {"message", "Left out of the search or the fit: " + JoinNames(parts) + "."},
                        {"terms", parts}});
  }
  if (fit.status == FitStatus::kNoResidualDf) {
    cautions.push_back({{"kind", "no-residual-df"},
                        {"message", "No residual degrees of freedom (n <= k): no standard errors "
                                    "or tests for the final model."}});
  }
  return cautions;
}

json BuildAuditDocument(const AuditRun& run, const AuditDocumentOptions& options) {
  json document;
  document["format"] = kAuditFormat;
  document["format_version"] = kAuditFormatVersion;
  document["tool"] = ToolJson();
  document["created_at"] = options.created_at.empty() ? UtcTimestamp() : options.created_at;
  document["duration_seconds"] = run.duration_seconds;
  document["plan"] = {{"verbatim", run.plan.verbatim},
                      {"normalised", PlanToJson(run.plan.plan, &run.design)}};
  document["settings"] = SettingsJson(run.options);
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
  document["prediction"] = PredictionSectionJson(run.fit, run.design, run.prediction_support);
  document["cautions"] = AuditCautions(run);
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
    document["signature"] = {{"algorithm", "ed25519"},
                             {"public_key", signer->PublicKeyHex()},
                             {"signed", "seal"},
                             {"value", signer->SignHex(seal)}};
  }
}

std::string SerializeAudit(const json& document) { return document.dump(2) + "\n"; }

json ReadAuditFile(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path.string() + ": cannot open the audit file");
  std::ostringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) throw InputError(path.string() + ": read error");
  const std::string text = buffer.str();
  json document;
  try {
    document = json::parse(text);
  } catch (const json::parse_error& error) {
    // Line and column of the byte where parsing failed.
    std::uint64_t line = 1, column = 1;
    const std::size_t end = std::min<std::size_t>(error.byte > 0 ? error.byte - 1 : 0, text.size());
    for (std::size_t i = 0; i < end; ++i) {
      if (text[i] == '\n') {
        ++line;
        column = 1;
      } else {
        ++column;
      }
    }
    throw InputError(FormatLocation(path.string(), line, column) + ": malformed JSON in the audit file");
  }
  if (!document.is_object() || !document.contains("format") ||
      document["format"] != std::string(kAuditFormat)) {
    throw InputError(path.string() + ": not a stepledger audit (key 'format' is not \"" +
                     std::string(kAuditFormat) + "\")");
  }
  if (!document.contains("format_version") || !document["format_version"].is_number_integer()) {
    throw InputError(path.string() + ": key 'format_version': expected an integer");
  }
  if (document["format_version"].get<std::int64_t>() > kAuditFormatVersion) {
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

json WriteAuditDocument(const AuditRun& run, const AuditDocumentOptions& document_options,
                        const AuditOutputOptions& output) {
  // Everything that can fail without touching the file system comes first.
  std::optional<Ed25519Signer> signer;
  if (!output.sign_key.empty()) signer.emplace(Ed25519Signer::FromPemFile(output.sign_key));
  json document = BuildAuditDocument(run, document_options);
  SealAuditDocument(document, signer ? &*signer : nullptr);
  const std::string text = SerializeAudit(document);

  const std::filesystem::path folder = output.folder.empty() ? std::filesystem::path(".") : output.folder;
  const std::filesystem::path file = folder / kAuditFileName;
  std::error_code error;
  bool created_folder = false;
  if (!std::filesystem::exists(folder, error)) {
    if (!std::filesystem::create_directory(folder, error)) {
      throw InputError(folder.string() + ": cannot create the output folder: " + error.message());
    }
    created_folder = true;
  } else if (!std::filesystem::is_directory(folder, error)) {
    throw InputError(folder.string() + ": the output folder is not a folder");
  }
  try {
    WriteFileAtomically(file, text, AtomicWriteOptions{.overwrite = output.overwrite});
  } catch (...) {
    if (created_folder) std::filesystem::remove(folder, error);  // leave things as they were
    throw;
  }
  return document;
}

AuditRunOptions RunOptionsFromSettings(const json& settings) {
  AuditRunOptions options;
  if (!settings.is_object()) return options;
  if (settings.contains("delimiter") && settings["delimiter"].is_string()) {
    const std::string delimiter = settings["delimiter"].get<std::string>();
    if (delimiter.size() == 1) options.csv.delimiter = delimiter[0];
  }
  if (settings.contains("threads") && settings["threads"].is_number_integer()) {
    options.threads = settings["threads"].get<int>();
  }
  if (settings.contains("confidence_level") && settings["confidence_level"].is_number()) {
    options.fit.confidence_level = settings["confidence_level"].get<double>();
  }
  if (settings.contains("max_refinement_passes") && settings["max_refinement_passes"].is_number_integer()) {
    options.fit.max_refinement_passes = settings["max_refinement_passes"].get<int>();
  }
  if (settings.contains("refinement_tolerance") && settings["refinement_tolerance"].is_number()) {
    options.fit.refinement_tolerance = settings["refinement_tolerance"].get<double>();
  }
  if (settings.contains("alias_tolerance") && settings["alias_tolerance"].is_number()) {
    options.fit.kernel.alias_tolerance = settings["alias_tolerance"].get<double>();
  }
  if (settings.contains("vif_caution") && settings["vif_caution"].is_number()) {
    options.vif_caution = settings["vif_caution"].get<double>();
  }
  if (settings.contains("diagnostics") && settings["diagnostics"].is_boolean()) {
    options.diagnostics = settings["diagnostics"].get<bool>();
  }
  return options;
}

}  // namespace stepledger

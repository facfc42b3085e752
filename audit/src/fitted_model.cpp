#include "stepledger/audit/fitted_model.h"

#include "audit_reader.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <set>

#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

constexpr double kUndefined = std::numeric_limits<double>::quiet_NaN();

using audit_detail::AuditReader;

ColumnKind ColumnKindFromText(const AuditReader& reader, const std::string& text, const std::string& path) {
  for (ColumnKind kind : {ColumnKind::kNumeric, ColumnKind::kCategorical, ColumnKind::kEmpty}) {
    if (text == ToString(kind)) return kind;
  }
  reader.Fail(path, "unknown column type \"" + text + "\"");
}

TermKind TermKindFromText(const AuditReader& reader, const std::string& text, const std::string& path) {
  for (TermKind kind : {TermKind::kNumeric, TermKind::kPower, TermKind::kLog, TermKind::kCategorical,
                        TermKind::kProduct}) {
    if (text == ToString(kind)) return kind;
  }
  reader.Fail(path, "unknown term kind \"" + text + "\"");
}

FitStatus FitStatusFromText(const AuditReader& reader, const std::string& text, const std::string& path) {
  for (FitStatus status : {FitStatus::kCompleted, FitStatus::kAliased, FitStatus::kNoResidualDf}) {
    if (text == ToString(status)) return status;
  }
  reader.Fail(path, "unknown fit status \"" + text + "\"");
}

DataProfile ProfileFromAudit(const AuditReader& reader, const json& data) {
  DataProfile profile;
  profile.path = reader.String(data, "data", "file");
  profile.rows = reader.Count(data, "data", "rows_read");
  const json& columns = reader.Array(data, "data", "columns");
  for (std::size_t i = 0; i < columns.size(); ++i) {
    const std::string path = AuditReader::Index("data.columns", i);
    const json& entry = reader.ObjectAt(columns, "data.columns", i);
    ColumnProfile column;
    column.name = reader.String(entry, path, "name");
    column.index = i;
    column.kind = ColumnKindFromText(reader, reader.String(entry, path, "type"), path + ".type");
    column.present = reader.Count(entry, path, "present");
    column.missing = reader.Count(entry, path, "missing");
    column.min = reader.OptionalNumber(entry, path, "min").value_or(kUndefined);
    column.max = reader.OptionalNumber(entry, path, "max").value_or(kUndefined);
    column.mean = reader.OptionalNumber(entry, path, "mean").value_or(kUndefined);
    column.sd = reader.OptionalNumber(entry, path, "sd").value_or(kUndefined);
    const json& levels = reader.Array(entry, path, "levels");
    for (std::size_t l = 0; l < levels.size(); ++l) {
      const std::string level_path = AuditReader::Index(path + ".levels", l);
      const json& level = reader.ObjectAt(levels, path + ".levels", l);
      column.levels.push_back({reader.String(level, level_path, "level"), reader.Count(level, level_path, "count")});
    }
    column.too_many_levels = reader.OptionalBool(entry, path, "too_many_levels", false);
    profile.columns.push_back(std::move(column));
  }
  return profile;
}

std::vector<std::string> DesignColumnNames(const Design& design) {
  std::vector<std::string> names;
  for (const DesignColumn& column : design.columns) names.push_back(column.name);
  return names;
}

std::size_t ColumnIndex(const Design& design, const std::string& name) {
  for (std::size_t c = 0; c < design.columns.size(); ++c) {
    if (design.columns[c].name == name) return c;
  }
  return kNoTerm;
}

CoefficientEstimate CoefficientFromJson(const AuditReader& reader, const json& entry, const std::string& path) {
  CoefficientEstimate coefficient;
  coefficient.name = reader.String(entry, path, "name");
  coefficient.term = reader.String(entry, path, "term");
  coefficient.estimate = reader.Number(entry, path, "estimate");
  coefficient.se = reader.OptionalNumber(entry, path, "se");
  coefficient.t = reader.OptionalNumber(entry, path, "t");
  coefficient.p = reader.OptionalNumber(entry, path, "p");
  coefficient.ci_low = reader.OptionalNumber(entry, path, "ci_low");
  coefficient.ci_high = reader.OptionalNumber(entry, path, "ci_high");
  coefficient.vif = reader.OptionalNumber(entry, path, "vif");
  return coefficient;
}

}  // namespace

json PredictionSectionJson(const FitResult& fit, const Design& design, const PredictionSupport& support,
                           const std::vector<std::string>& set_files) {
  json columns = json::array();
  for (std::size_t column : fit.columns) columns.push_back(design.columns[column].name);
  json triangle = json::array();
  for (arma::uword i = 0; i < fit.model_triangle.n_rows; ++i) {
    json row = json::array();
    for (arma::uword j = 0; j < fit.model_triangle.n_cols; ++j) {
      row.push_back(j < i ? 0.0 : fit.model_triangle(i, j));
    }
    triangle.push_back(std::move(row));
  }
  json ranges = json::array();
  for (const TermRange& range : support.ranges) {
    ranges.push_back({{"term", range.term},
                      {"column", range.column},
                      {"kind", ToString(range.kind)},
                      {"min", NumberOrNull(range.min)},
                      {"max", NumberOrNull(range.max)}});
  }
  json section = {{"columns", std::move(columns)},
                  {"triangle", std::move(triangle)},
                  {"scales", fit.model_scales},
                  {"ranges", std::move(ranges)},
                  {"max_unit_leverage", NumberOrNull(support.max_unit_leverage)},
                  {"max_unit_leverage_line", support.max_unit_leverage_line},
                  {"smearing_factor", NumberOrNull(support.smearing_factor)}};
  // A data set's lines start again in every file: name the row's file (an optional key, so a
  // single file's audit keeps its shape).
  if (!set_files.empty() && support.max_unit_leverage && support.max_unit_leverage_file < set_files.size()) {
    section["max_unit_leverage_file"] = set_files[support.max_unit_leverage_file];
  }
  return section;
}

namespace {

// A plan error's message without its "plan key 'PATH': " or "plan: " start (the caller names
// the key in the audit).
std::string PlanErrorDetail(const PlanError& error) {
  const std::string text = error.what();
  const std::string keyed = "plan key '" + error.key_path() + "': ";
  if (!error.key_path().empty() && text.rfind(keyed, 0) == 0) return text.substr(keyed.size());
  if (text.rfind("plan: ", 0) == 0) return text.substr(6);
  return text;
}

// The plan as normalised when the audit was written (terms explicit, baselines chosen).
Plan PlanFromAudit(const AuditReader& reader, const json& audit, const InputLimits& limits) {
  const json& plan = reader.Object(audit, "", "plan");
  const json& normalised = reader.Object(plan, "plan", "normalised");
  try {
    return PlanFromJson(normalised, limits);
  } catch (const PlanError& error) {
    reader.Fail("plan.normalised" + (error.key_path().empty() ? "" : "." + error.key_path()), PlanErrorDetail(error));
  }
}

// The data section: the column profile and the file's name, digest and missing-value tokens.
void ReadDataSection(const AuditReader& reader, const json& audit, FittedModel& model) {
  const json& data = reader.Object(audit, "", "data");
  model.profile = ProfileFromAudit(reader, data);
  model.data_file_name = reader.String(data, "data", "file");
  model.data_sha256 = reader.String(data, "data", "sha256");
  model.missing_tokens = reader.Strings(reader.Array(data, "data", "missing"), "data.missing");
}

// The plan rebuilt on the recorded columns must give the design columns the audit records.
void CheckRecordedDesign(const AuditReader& reader, const json& audit, const Design& rebuilt) {
  const json& design = reader.Object(audit, "", "design");
  const json& design_columns = reader.Array(design, "design", "columns");
  std::vector<std::string> recorded;
  for (std::size_t i = 0; i < design_columns.size(); ++i) {
    recorded.push_back(reader.String(reader.ObjectAt(design_columns, "design.columns", i), AuditReader::Index("design.columns", i), "name"));
  }
  if (recorded != DesignColumnNames(rebuilt)) {
    reader.Fail("design.columns", "the plan rebuilds into other design columns than the audit records; "
                                  "the audit is inconsistent (run `stepledger verify` on it)");
  }
}

// The final model's section: terms, status, sums, criteria and coefficients. Returns each
// coefficient's estimate by name, which the prediction columns are matched against.
std::map<std::string, double> ReadFinalModel(const AuditReader& reader, const json& audit, const Design& design,
                                             FitResult& fit) {
  const json& model_json = reader.Object(audit, "", "model");
  fit.terms = reader.Strings(reader.Array(model_json, "model", "terms"), "model.terms");
  for (std::size_t i = 0; i < fit.terms.size(); ++i) {
    const std::size_t term = design.FindTerm(fit.terms[i]);
    if (term == kNoTerm) reader.Fail(AuditReader::Index("model.terms", i), "no term \"" + fit.terms[i] + "\" in the design");
    fit.term_indices.push_back(term);
  }
  fit.status = FitStatusFromText(reader, reader.String(model_json, "model", "status"), "model.status");
  fit.intercept = reader.OptionalBool(model_json, "model", "intercept", design.intercept);
  fit.n = reader.Count(model_json, "model", "n");
  fit.k = reader.Count(model_json, "model", "k");
  fit.df_residual = reader.Number(model_json, "model", "df_residual");
  fit.rss = reader.OptionalNumber(model_json, "model", "rss").value_or(kUndefined);
  fit.tss = reader.OptionalNumber(model_json, "model", "tss").value_or(kUndefined);
  fit.ssr = reader.OptionalNumber(model_json, "model", "ss_regression").value_or(kUndefined);
  fit.weight_sum = reader.OptionalNumber(model_json, "model", "weight_sum").value_or(kUndefined);
  fit.log_weight_sum = reader.OptionalNumber(model_json, "model", "log_weight_sum").value_or(kUndefined);
  fit.criteria.r2 = reader.OptionalNumber(model_json, "model", "r2");
  fit.criteria.adj_r2 = reader.OptionalNumber(model_json, "model", "adj_r2");
  fit.criteria.sigma = reader.OptionalNumber(model_json, "model", "sigma");
  fit.criteria.log_likelihood = reader.OptionalNumber(model_json, "model", "log_likelihood");
  fit.criteria.aic = reader.OptionalNumber(model_json, "model", "aic");
  fit.criteria.aicc = reader.OptionalNumber(model_json, "model", "aicc");
  fit.criteria.bic = reader.OptionalNumber(model_json, "model", "bic");
  fit.criteria.cp = reader.OptionalNumber(model_json, "model", "cp");
  fit.f = reader.OptionalNumber(model_json, "model", "f");
  fit.f_p = reader.OptionalNumber(model_json, "model", "f_p");
  fit.confidence_level = reader.Number(model_json, "model", "confidence_level");
  fit.rcond = reader.OptionalNumber(model_json, "model", "rcond").value_or(kUndefined);
  fit.alias_tolerance = reader.Number(model_json, "model", "alias_tolerance");
  fit.refinement_passes = AuditReader::Find(model_json, "refinement_passes") == nullptr
                              ? 0
                              : static_cast<int>(reader.Integer(model_json, "model", "refinement_passes", 0, 1000));
  fit.refinement_correction = reader.OptionalNumber(model_json, "model", "refinement_correction").value_or(kUndefined);
  if (model_json.contains("refinement_stop")) {
    const std::string stop = reader.String(model_json, "model", "refinement_stop");
    const std::optional<RefinementStop> parsed = RefinementStopFromString(stop);
    if (!parsed) {
      reader.Fail("model.refinement_stop", "'" + stop +
                                               "' is not one of not-refined, converged, not-shrinking, pass-limit");
    }
    fit.refinement_stop = *parsed;
  } else {
    // Written before the reason was recorded: the refinement then always ran until its
    // correction was below the tolerance, short of a limit or a growing correction that the
    // audit does not tell apart; it reads as converged when it made passes.
    fit.refinement_stop = fit.refinement_passes > 0 ? RefinementStop::kConverged : RefinementStop::kNotRefined;
  }
  fit.aliased_columns = reader.Strings(reader.Array(model_json, "model", "aliased_columns"), "model.aliased_columns");
  const json& coefficients = reader.Array(model_json, "model", "coefficients");
  std::map<std::string, double> estimates;
  for (std::size_t i = 0; i < coefficients.size(); ++i) {
    fit.coefficients.push_back(CoefficientFromJson(reader, reader.ObjectAt(coefficients, "model.coefficients", i),
                                                    AuditReader::Index("model.coefficients", i)));
    estimates[fit.coefficients.back().name] = fit.coefficients.back().estimate;
  }
  return estimates;
}

// The model's columns, estimates and triangle from the prediction section.
void ReadPredictionFit(const AuditReader& reader, const json& prediction, const Design& design,
                       const std::map<std::string, double>& estimates, FitResult& fit) {
  const std::vector<std::string> columns = reader.Strings(reader.Array(prediction, "prediction", "columns"), "prediction.columns");
  if (columns.size() != fit.k) {
    reader.Fail("prediction.columns", std::to_string(columns.size()) + " columns, but model.k is " + std::to_string(fit.k));
  }
  fit.beta.set_size(columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) {
    const std::size_t column = ColumnIndex(design, columns[j]);
    const std::string path = AuditReader::Index("prediction.columns", j);
    if (column == kNoTerm) reader.Fail(path, "no design column \"" + columns[j] + "\"");
    const auto estimate = estimates.find(columns[j]);
    if (estimate == estimates.end()) reader.Fail(path, "\"" + columns[j] + "\" has no entry in model.coefficients");
    fit.columns.push_back(column);
    fit.beta(j) = estimate->second;
  }
  const json& triangle = reader.Array(prediction, "prediction", "triangle");
  if (triangle.size() != columns.size()) {
    reader.Fail("prediction.triangle", "expected " + std::to_string(columns.size()) + " rows, found " +
                                           std::to_string(triangle.size()));
  }
  fit.model_triangle.zeros(columns.size(), columns.size());
  for (std::size_t i = 0; i < triangle.size(); ++i) {
    const std::string path = AuditReader::Index("prediction.triangle", i);
    const std::vector<double> row = reader.Numbers(triangle[i], path);
    if (row.size() != columns.size()) reader.Fail(path, "expected " + std::to_string(columns.size()) + " numbers");
    for (std::size_t j = i; j < row.size(); ++j) fit.model_triangle(i, j) = row[j];
  }
  fit.model_scales = reader.Numbers(reader.Array(prediction, "prediction", "scales"), "prediction.scales");
  if (fit.model_scales.size() != columns.size() + 1) {
    reader.Fail("prediction.scales", "expected " + std::to_string(columns.size() + 1) + " numbers");
  }
}

// The support of the model's data: term ranges, the largest unit leverage, the smearing factor.
PredictionSupport SupportFromAudit(const AuditReader& reader, const json& prediction) {
  PredictionSupport support;
  const json& ranges = reader.Array(prediction, "prediction", "ranges");
  for (std::size_t i = 0; i < ranges.size(); ++i) {
    const std::string path = AuditReader::Index("prediction.ranges", i);
    const json& entry = reader.ObjectAt(ranges, "prediction.ranges", i);
    TermRange range;
    range.term = reader.String(entry, path, "term");
    range.column = reader.String(entry, path, "column");
    range.kind = TermKindFromText(reader, reader.String(entry, path, "kind"), path + ".kind");
    range.min = reader.Number(entry, path, "min");
    range.max = reader.Number(entry, path, "max");
    support.ranges.push_back(std::move(range));
  }
  support.max_unit_leverage = reader.OptionalNumber(prediction, "prediction", "max_unit_leverage");
  support.max_unit_leverage_line = reader.OptionalCount(prediction, "prediction", "max_unit_leverage_line").value_or(0);
  support.smearing_factor = reader.OptionalNumber(prediction, "prediction", "smearing_factor");
  return support;
}

}  // namespace

json NormalisedPlanFromVerbatim(const json& audit_as_read, std::string_view source_name,
                                const InputLimits& limits) {
  const AuditReader reader(source_name);
  const json audit = AuditInCurrentShape(audit_as_read);
  const json& plan = reader.Object(audit, "", "plan");
  const std::string verbatim = reader.String(plan, "plan", "verbatim");
  LoadedPlan loaded;
  try {
    loaded = ParsePlanText(verbatim, std::string(source_name) + " plan.verbatim", limits);
  } catch (const PlanError& error) {
    reader.Fail("plan.verbatim" + (error.key_path().empty() ? "" : "." + error.key_path()), PlanErrorDetail(error));
  }
  const DataProfile profile = ProfileFromAudit(reader, reader.Object(audit, "", "data"));
  try {
    const Design design = BuildDesign(loaded.plan.design, profile, limits);
    return PlanToJson(loaded.plan, &design);
  } catch (const InputError& error) {
    reader.Fail("plan.verbatim", std::string("does not build on the recorded columns: ") + error.what());
  }
}

json NormalisedPlanAsRead(const json& audit_as_read, std::string_view source_name,
                          const InputLimits& limits) {
  const AuditReader reader(source_name);
  return PlanToJson(PlanFromAudit(reader, AuditInCurrentShape(audit_as_read), limits));
}

FittedModel FittedModelFromAudit(const json& audit_as_read, std::string_view source_name,
                                 const InputLimits& limits) {
  const AuditReader reader(source_name);
  // Older audits (TERM[LEVEL] columns, model.ssr) are read with today's names.
  const json audit = AuditInCurrentShape(audit_as_read);
  FittedModel model;
  if (!audit.is_object() || !audit.contains("prediction")) {
    reader.Fail("prediction",
                "missing: this audit was written before stepledger recorded what pricing new rows "
                "needs; run `stepledger rerun` on it (or select again) with this version");
  }
  const json& prediction = reader.Object(audit, "", "prediction");
  model.plan = PlanFromAudit(reader, audit, limits);
  ReadDataSection(reader, audit, model);
  try {
    model.design = BuildDesign(model.plan.design, model.profile, limits);
  } catch (const LimitError&) {
    throw;  // the reading machine's limit, with its own advice
  } catch (const InputError& error) {
    reader.Fail("plan.normalised", std::string("does not rebuild on the recorded columns: ") + error.what());
  }
  CheckRecordedDesign(reader, audit, model.design);
  const std::map<std::string, double> estimates = ReadFinalModel(reader, audit, model.design, model.fit);
  ReadPredictionFit(reader, prediction, model.design, estimates, model.fit);
  model.support = SupportFromAudit(reader, prediction);
  return model;
}

PricingModel MakePricingModel(const FittedModel& fitted) {
  std::set<std::string, std::less<>> needed;
  for (const std::size_t term : TermsNeededByModel(fitted.design, fitted.fit)) {
    needed.insert(fitted.design.terms[term].name);
  }
  DesignSpec spec = fitted.plan.design;
  spec.all_terms = false;
  spec.terms.clear();
  for (const TermSpec& term : fitted.plan.design.terms) {
    if (needed.contains(term.name)) spec.terms.push_back(term);
  }
  PricingModel model;
  if (spec.terms.empty()) {
    // The selection kept no term: the intercept alone, which reads no column of the rows.
    // (A DesignSpec needs a term, so this design is made by hand.)
    model.design.response = fitted.design.response;
    model.design.response_transform = fitted.design.response_transform;
    model.design.intercept = fitted.design.intercept;
    model.design.weights = fitted.design.weights;
    if (fitted.design.intercept) model.design.columns.push_back(fitted.design.columns.front());
  } else {
    // A part of the design FittedModelFromAudit built within its limits.
    model.design = BuildDesign(spec, fitted.profile, InputLimits::Unlimited());
  }
  model.fit = fitted.fit;
  for (const std::size_t column : fitted.fit.columns) {
    model.column_names.push_back(fitted.design.columns[column].name);
  }
  for (const TermRange& range : fitted.support.ranges) {
    model.ranges.push_back({range.term, range.min, range.max});
  }
  model.max_unit_leverage = fitted.support.max_unit_leverage;
  model.smearing_factor = fitted.support.smearing_factor;
  return model;
}

}  // namespace stepledger

#include "stepledger/audit/audit_compare.h"

#include "audit_compare_internal.h"
#include "audit_reader.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <cstdio>
#include <array>
#include <map>
#include <string>
#include <vector>
#include <sstream>

#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/engine/column_source.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/prediction.h"

namespace stepledger {
namespace compare_detail {

// A threshold as people write it: "0.1", "2".
std::string ThresholdText(double value) {
  // The shortest text that reads back as the value (a threshold is typed, not computed).
  return value == std::round(value) ? FormatCount(static_cast<std::int64_t>(value)) : nlohmann::json(value).dump();
}

}  // namespace compare_detail

namespace {

using json = nlohmann::json;

using audit_detail::AuditReader;

// What the comparison reads of one audit, read once with its types checked: a wrong type is bad
// input naming the audit and the key ("new.json: key 'model.terms': expected an array, found
// string"), never a JSON library exception.
struct ColumnView {
  std::string name;
  std::string type;
  std::optional<double> mean, sd, min, max;
  nlohmann::json summary;  // {min, max, mean, sd} as recorded
};

struct CoefficientView {
  std::string name;
  std::optional<double> estimate, se;
};

struct AuditView {
  std::optional<std::string> seal;
  std::optional<std::string> data_sha256;
  std::vector<ColumnView> columns;
  std::optional<std::int64_t> rows_used;
  std::optional<json> normalised_plan;  // absent: not compared
  std::vector<RouteMove> steps;
  std::vector<std::string> terms;
  std::vector<CoefficientView> coefficients;
  std::optional<double> rss, weight_sum;
  std::optional<ValidationResult> validation;  // absent in audits made before it existed
};

AuditView ReadForComparison(const json& audit, const AuditReader& reader) {
  AuditView view;
  if (!audit.is_object()) reader.Fail("", "expected the audit to be a JSON object");
  view.seal = reader.OptionalString(audit, "", "seal");
  const json& data = reader.Object(audit, "", "data");
  view.data_sha256 = reader.OptionalString(data, "data", "sha256");
  if (const auto rows = reader.OptionalCount(data, "data", "rows_used")) view.rows_used = static_cast<std::int64_t>(*rows);
  const json& columns = reader.OptionalArray(data, "data", "columns");
  for (std::size_t i = 0; i < columns.size(); ++i) {
    const std::string path = AuditReader::Index("data.columns", i);
    const json& column = reader.ObjectAt(columns, "data.columns", i);
    ColumnView entry;
    entry.name = reader.String(column, path, "name");
    entry.type = reader.String(column, path, "type");
    entry.mean = reader.OptionalNumber(column, path, "mean");
    entry.sd = reader.OptionalNumber(column, path, "sd");
    entry.min = reader.OptionalNumber(column, path, "min");
    entry.max = reader.OptionalNumber(column, path, "max");
    entry.summary = json::object();
    for (const char* key : {"min", "max", "mean", "sd"}) {
      const json* value = AuditReader::Find(column, key);
      entry.summary[key] = value != nullptr ? *value : json(nullptr);
    }
    view.columns.push_back(std::move(entry));
  }
  if (const json* plan = AuditReader::Find(audit, "plan")) {
    if (!plan->is_object()) reader.Fail("plan", "expected an object, found " + AuditReader::TypeOf(*plan));
    if (AuditReader::Find(*plan, "normalised") != nullptr) view.normalised_plan = reader.Object(*plan, "plan", "normalised");
  }
  const json& steps = reader.OptionalArray(audit, "", "steps");
  for (std::size_t i = 0; i < steps.size(); ++i) {
    const std::string path = AuditReader::Index("steps", i);
    const json& step = reader.ObjectAt(steps, "steps", i);
    view.steps.push_back({reader.OptionalString(step, path, "action"), reader.OptionalString(step, path, "term")});
  }
  const json& model = reader.Object(audit, "", "model");
  view.terms = reader.Strings(reader.OptionalArray(model, "model", "terms"), "model.terms");
  const json& coefficients = reader.OptionalArray(model, "model", "coefficients");
  for (std::size_t i = 0; i < coefficients.size(); ++i) {
    const std::string path = AuditReader::Index("model.coefficients", i);
    const json& coefficient = reader.ObjectAt(coefficients, "model.coefficients", i);
    view.coefficients.push_back({reader.String(coefficient, path, "name"), reader.OptionalNumber(coefficient, path, "estimate"),
                                 reader.OptionalNumber(coefficient, path, "se")});
  }
  view.rss = reader.OptionalNumber(model, "model", "rss");
  view.weight_sum = reader.OptionalNumber(model, "model", "weight_sum");
  if (const json* validation = AuditReader::Find(audit, "validation"); validation != nullptr && !validation->is_null()) {
    view.validation = ValidationFromJson(*validation, reader.source());
  }
  return view;
}

bool Contains(const std::vector<std::string>& names, const std::string& name) {
  return std::find(names.begin(), names.end(), name) != names.end();
}

// How far a numeric column moved, in old SD units: the larger of the mean's shift and the
// amount by which the new range reaches beyond the old one at either end (a range that
// narrows, or ends that move inside the old range, are sampling noise of the extremes and do
// not count: the model's ranges only matter where new rows lie outside them). Infinity when
// the old SD is 0 or undefined and something moved, or when a value is recorded on one side
// only.
double ShiftInOldSd(const ColumnView& before, const ColumnView& after, double tolerance) {
  const auto& old_sd = before.sd;
  const auto &old_mean = before.mean, &new_mean = after.mean;
  const auto &old_min = before.min, &new_min = after.min;
  const auto &old_max = before.max, &new_max = after.max;
  if (old_mean.has_value() != new_mean.has_value() || old_min.has_value() != new_min.has_value() ||
      old_max.has_value() != new_max.has_value()) {
    return std::numeric_limits<double>::infinity();
  }
  std::vector<double> moves;  // in the column's units
  if (old_mean && !NumbersAgree(*old_mean, *new_mean, tolerance)) moves.push_back(std::fabs(*new_mean - *old_mean));
  if (old_min && *new_min < *old_min && !NumbersAgree(*old_min, *new_min, tolerance)) moves.push_back(*old_min - *new_min);
  if (old_max && *new_max > *old_max && !NumbersAgree(*old_max, *new_max, tolerance)) moves.push_back(*new_max - *old_max);
  if (moves.empty()) return 0;
  const double largest = *std::max_element(moves.begin(), moves.end());
  return (old_sd && *old_sd > 0) ? largest / *old_sd : std::numeric_limits<double>::infinity();
}

json StringOrNull(const std::optional<std::string>& value) { return value ? json(*value) : json(nullptr); }

json StringsJson(const std::vector<std::string>& names) {
  json array = json::array();
  for (const std::string& name : names) array.push_back(name);
  return array;
}

ColumnsComparisonPart ColumnsComparison(const AuditView& old_view, const AuditView& new_view, const CompareOptions& options) {
  std::map<std::string, const ColumnView*> old_columns, new_columns;
  for (const ColumnView& column : old_view.columns) old_columns.emplace(column.name, &column);
  for (const ColumnView& column : new_view.columns) new_columns.emplace(column.name, &column);
  ColumnsComparisonPart columns;
  columns.moved_threshold_in_old_sd = options.column_shift_in_old_sd;
  for (const ColumnView& column : new_view.columns) {
    if (!old_columns.count(column.name)) columns.added.push_back(column.name);
  }
  for (const ColumnView& column : old_view.columns) {
    const std::string& name = column.name;
    const auto found = new_columns.find(name);
    if (found == new_columns.end()) {
      columns.lost.push_back(name);
      continue;
    }
    const ColumnView& before = *old_columns.at(name);
    const ColumnView& after = *found->second;
    if (before.type != after.type) {
      columns.type_changed.push_back({name, before.type, after.type});
      continue;
    }
    if (before.type != "numeric") continue;
    ++columns.numeric_compared;
    const double shift = ShiftInOldSd(before, after, options.relative_tolerance);
    if (shift <= options.column_shift_in_old_sd) continue;
    MovedColumn entry;
    entry.column = name;
    entry.old_summary = before.summary;
    entry.new_summary = after.summary;
    if (before.mean && after.mean && before.sd && *before.sd > 0) {
      entry.mean_shift_in_old_sd = (*after.mean - *before.mean) / *before.sd;
    }
    if (std::isfinite(shift)) entry.shift_in_old_sd = shift;
    columns.moved.push_back(std::move(entry));
  }
  return columns;
}

// Keys of the two normalised plans whose values differ, in the new plan's key order. A key
// only one side records (an audit of an older format) is not compared.
PlanComparisonPart PlanComparison(const AuditView& old_view, const AuditView& new_view) {
  PlanComparisonPart part;
  if (!old_view.normalised_plan || !new_view.normalised_plan) return part;
  const json& old_plan = *old_view.normalised_plan;
  part.compared = true;
  for (const auto& [key, new_value] : new_view.normalised_plan->items()) {
    const auto old_value = old_plan.find(key);
    if (old_value == old_plan.end()) continue;
    if (*old_value != new_value) part.differences.push_back({key, *old_value, new_value});
  }
  return part;
}

RouteComparisonPart RouteComparison(const std::vector<RouteMove>& old_steps, const std::vector<RouteMove>& new_steps) {
  RouteComparisonPart route;
  const std::size_t common = std::min(old_steps.size(), new_steps.size());
  for (std::size_t index = 0; index < common; ++index) {
    if (old_steps[index] != new_steps[index]) return {false, index, old_steps[index], new_steps[index]};
  }
  if (old_steps.size() != new_steps.size()) {
    route.same = false;
    route.first_difference_step = common;
    if (common < old_steps.size()) route.old_move = old_steps[common];
    if (common < new_steps.size()) route.new_move = new_steps[common];
  }
  return route;
}

// Which terms of the final models entered, left or stayed, in each model's own term order.
FinalTermsComparisonPart FinalTermsComparison(const std::vector<std::string>& old_terms,
                                              const std::vector<std::string>& new_terms) {
  FinalTermsComparisonPart terms;
  for (const std::string& term : new_terms) {
    if (!Contains(old_terms, term)) terms.entered.push_back(term);
  }
  for (const std::string& term : old_terms) {
    (Contains(new_terms, term) ? terms.kept : terms.left).push_back(term);
  }
  return terms;
}

// The coefficients both models share, compared in the old model's order, and the names only one
// of them has.
struct CoefficientChanges {
  std::vector<CoefficientChange> shared;
  std::vector<std::string> only_old;
  std::vector<std::string> only_new;
  // True when some shared estimate moved beyond the relative tolerance.
  bool estimates_differ = false;
};

CoefficientChanges CompareCoefficients(const AuditView& old_view, const AuditView& new_view, const CompareOptions& options) {
  const double tolerance = options.relative_tolerance;
  CoefficientChanges changes;
  std::map<std::string, const CoefficientView*> new_coefficients;
  std::vector<std::string> new_names;
  for (const CoefficientView& coefficient : new_view.coefficients) {
    new_coefficients.emplace(coefficient.name, &coefficient);
    new_names.push_back(coefficient.name);
  }
  std::vector<std::string> old_names;
  for (const CoefficientView& before : old_view.coefficients) {
    const std::string& name = before.name;
    old_names.push_back(name);
    const auto found = new_coefficients.find(name);
    if (found == new_coefficients.end()) {
      changes.only_old.push_back(name);
      continue;
    }
    const CoefficientView& after = *found->second;
    CoefficientChange entry;
    entry.name = name;
    entry.old_estimate = before.estimate;
    entry.new_estimate = after.estimate;
    entry.old_se = before.se;
    entry.new_se = after.se;
    const auto& old_se = entry.old_se;
    const auto& new_se = entry.new_se;
    if (entry.old_estimate && entry.new_estimate) {
      const double change = *entry.new_estimate - *entry.old_estimate;
      if (!NumbersAgree(*entry.old_estimate, *entry.new_estimate, tolerance)) changes.estimates_differ = true;
      if (old_se && *old_se > 0) entry.change_in_old_se = change / *old_se;
      if (old_se && new_se && (*old_se > 0 || *new_se > 0)) {
        entry.change_in_joint_se = change / std::sqrt(*old_se * *old_se + *new_se * *new_se);
      }
    }
    entry.beyond_mark =
        entry.change_in_old_se.has_value() && std::fabs(*entry.change_in_old_se) > options.coefficient_mark_in_se;
    changes.shared.push_back(std::move(entry));
  }
  for (const std::string& name : new_names) {
    if (!Contains(old_names, name)) changes.only_new.push_back(name);
  }
  return changes;
}

// A recorded `comparison.prediction` (PredictionComparison's shape), checked before it is shown.
json CheckedRecordedPrediction(const json& prediction, const AuditReader& reader) {
  const std::string path = "comparison.prediction";
  if (!prediction.is_object()) reader.Fail(path, "expected an object, found " + AuditReader::TypeOf(prediction));
  const bool available = reader.Bool(prediction, path, "available");
  reader.OptionalString(prediction, path, "reason");
  for (const char* key : {"rows_read", "rows", "response_unusable", "unseen_level_rows"}) {
    reader.OptionalCount(prediction, path, key);
  }
  for (const char* key : {"old_model_rmse", "old_model_mean_error", "new_model_rmse"}) {
    reader.OptionalNumber(prediction, path, key);
  }
  if (const json* not_priced = AuditReader::Find(prediction, "not_priced")) {
    if (!not_priced->is_object()) reader.Fail(path + ".not_priced", "expected an object, found " + AuditReader::TypeOf(*not_priced));
    for (const auto& [flag, rows] : not_priced->items()) reader.Integer(rows, path + ".not_priced." + flag, 0);
  }
  if (available) reader.Count(prediction, path, "rows");
  return prediction;
}

// The prediction error needs the new rows; a rerun records it in the new audit.
json RecordedPrediction(const json& old_audit, const json& new_audit, const AuditReader& new_reader) {
  json prediction = {{"available", false},
                     {"reason", "needs the new rows: run 'stepledger rerun' or give compare --data"}};
  const json* comparison = AuditReader::Find(new_audit, "comparison");
  if (comparison == nullptr) return prediction;
  if (!comparison->is_object()) new_reader.Fail("comparison", "expected an object, found " + AuditReader::TypeOf(*comparison));
  const json* old_seal = AuditReader::Find(*comparison, "old_seal");
  const json* seal = AuditReader::Find(old_audit, "seal");
  const json* recorded = AuditReader::Find(*comparison, "prediction");
  if (old_seal != nullptr && seal != nullptr && *old_seal == *seal && recorded != nullptr) {
    prediction = CheckedRecordedPrediction(*recorded, new_reader);
  }
  return prediction;
}

ComparisonVerdict VerdictFromParts(const std::vector<std::string>& old_terms,
                                   const std::vector<std::string>& new_terms, const CoefficientChanges& changes) {
  // Term order does not make a different model; the set of terms does.
  std::vector<std::string> old_sorted = old_terms, new_sorted = new_terms;
  std::sort(old_sorted.begin(), old_sorted.end());
  std::sort(new_sorted.begin(), new_sorted.end());
  if (old_sorted != new_sorted || !changes.only_old.empty() || !changes.only_new.empty()) {
    return ComparisonVerdict::kDifferentTerms;
  }
  if (changes.estimates_differ) return ComparisonVerdict::kSameTermsRefitted;
  return ComparisonVerdict::kSameModel;
}

ValidationComparisonPart ValidationComparison(const AuditView& old_view, const AuditView& new_view) {
  ValidationComparisonPart part;
  if (!old_view.validation || !new_view.validation) return part;
  const ValidationResult& before = *old_view.validation;
  const ValidationResult& after = *new_view.validation;
  part.folds_compared = true;
  part.old_folds_rmse = before.folds.rmse;
  part.new_folds_rmse = after.folds.rmse;
  if (before.holdout && after.holdout) {
    part.holdout_compared = true;
    part.old_holdout_rmse = before.holdout->rmse;
    part.new_holdout_rmse = after.holdout->rmse;
  }
  if (!before.bootstrap || !after.bootstrap) return part;
  part.inclusion_compared = true;
  const auto frequency_of = [](const BootstrapValidation& bootstrap, const std::string& term) -> std::optional<double> {
    for (const TermInclusion& entry : bootstrap.inclusion) {
      if (entry.term == term) return entry.frequency;
    }
    return std::nullopt;
  };
  for (const TermInclusion& entry : before.bootstrap->inclusion) {
    part.inclusion.push_back({entry.term, entry.frequency, frequency_of(*after.bootstrap, entry.term)});
  }
  for (const TermInclusion& entry : after.bootstrap->inclusion) {
    if (!frequency_of(*before.bootstrap, entry.term)) part.inclusion.push_back({entry.term, std::nullopt, entry.frequency});
  }
  double largest = 0;
  for (std::size_t i = 0; i < part.inclusion.size(); ++i) {
    const InclusionChange& change = part.inclusion[i];
    if (!change.old_frequency || !change.new_frequency) continue;
    const double moved = std::fabs(*change.new_frequency - *change.old_frequency);
    if (moved > largest) {
      largest = moved;
      part.largest_change = i;
    }
  }
  return part;
}

}  // namespace

AuditComparison CompareAudits(const json& old_as_read, const json& new_as_read, const CompareOptions& options) {
  // Both in today's names, so that an audit of an older format_version compares like with like.
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  const AuditReader old_reader(options.old_name), new_reader(options.new_name);
  const AuditView old_view = ReadForComparison(old_audit, old_reader);
  const AuditView new_view = ReadForComparison(new_audit, new_reader);

  AuditComparison comparison;
  comparison.old_seal = old_view.seal;
  comparison.old_data_sha256 = old_view.data_sha256;
  comparison.new_data_sha256 = new_view.data_sha256;
  comparison.same_data = old_view.data_sha256 == new_view.data_sha256;
  comparison.plan = PlanComparison(old_view, new_view);
  comparison.columns = ColumnsComparison(old_view, new_view, options);
  comparison.rows = {old_view.rows_used, new_view.rows_used};
  comparison.route = RouteComparison(old_view.steps, new_view.steps);
  comparison.final_terms = FinalTermsComparison(old_view.terms, new_view.terms);

  CoefficientChanges changes = CompareCoefficients(old_view, new_view, options);
  comparison.verdict = VerdictFromParts(old_view.terms, new_view.terms, changes);
  comparison.coefficients = std::move(changes.shared);
  comparison.coefficient_mark_in_se = options.coefficient_mark_in_se;
  comparison.coefficients_only_old = std::move(changes.only_old);
  comparison.coefficients_only_new = std::move(changes.only_new);
  comparison.prediction = RecordedPrediction(old_audit, new_audit, new_reader);
  comparison.validation = ValidationComparison(old_view, new_view);
  return comparison;
}

namespace {

json RouteMoveJson(const std::optional<RouteMove>& move) {
  if (!move) return nullptr;
  return {{"action", StringOrNull(move->action)}, {"term", StringOrNull(move->term)}};
}

}  // namespace

json AuditComparison::ToJson() const {
  json plan_json = {{"compared", plan.compared}, {"same", nullptr}, {"differences", json::array()}};
  if (plan.compared) plan_json["same"] = plan.differences.empty();
  for (const PlanDifference& difference : plan.differences) {
    plan_json["differences"].push_back({{"key", difference.key}, {"old", difference.old_value}, {"new", difference.new_value}});
  }
  json type_changed = json::array(), moved = json::array();
  for (const ColumnTypeChange& change : columns.type_changed) {
    type_changed.push_back({{"column", change.column}, {"old", change.old_type}, {"new", change.new_type}});
  }
  for (const MovedColumn& entry : columns.moved) {
    moved.push_back({{"column", entry.column},
                     {"old", entry.old_summary},
                     {"new", entry.new_summary},
                     {"mean_shift_in_old_sd", NumberOrNull(entry.mean_shift_in_old_sd)},
                     {"shift_in_old_sd", NumberOrNull(entry.shift_in_old_sd)}});
  }
  json coefficients_json = json::array();
  for (const CoefficientChange& entry : coefficients) {
    coefficients_json.push_back({{"name", entry.name},
                                 {"old_estimate", NumberOrNull(entry.old_estimate)},
                                 {"new_estimate", NumberOrNull(entry.new_estimate)},
                                 {"old_se", NumberOrNull(entry.old_se)},
                                 {"new_se", NumberOrNull(entry.new_se)},
                                 {"change_in_old_se", NumberOrNull(entry.change_in_old_se)},
                                 {"change_in_joint_se", NumberOrNull(entry.change_in_joint_se)},
                                 {"beyond_mark", entry.beyond_mark}});
  }
  const auto count_or_null = [](const std::optional<std::int64_t>& value) { return value ? json(*value) : json(nullptr); };
  json comparison;
  comparison["old_seal"] = StringOrNull(old_seal);
  comparison["old_data_sha256"] = StringOrNull(old_data_sha256);
  comparison["new_data_sha256"] = StringOrNull(new_data_sha256);
  comparison["same_data"] = same_data;
  comparison["plan"] = std::move(plan_json);
  comparison["columns"] = {{"added", StringsJson(columns.added)},
                           {"lost", StringsJson(columns.lost)},
                           {"type_changed", type_changed},
                           {"moved", moved},
                           {"numeric_compared", columns.numeric_compared},
                           {"moved_rule", "a numeric column is listed when its mean moved, or its range reaches beyond "
                                          "the old range, by more than " +
                                              compare_detail::ThresholdText(columns.moved_threshold_in_old_sd) +
                                              " old standard deviations"},
                           {"moved_threshold_in_old_sd", columns.moved_threshold_in_old_sd}};
  comparison["rows"] = {{"old_rows_used", count_or_null(rows.old_rows_used)},
                        {"new_rows_used", count_or_null(rows.new_rows_used)}};
  comparison["route"] = {{"same", route.same},
                         {"first_difference_step", route.first_difference_step ? json(*route.first_difference_step)
                                                                               : json(nullptr)},
                         {"old", RouteMoveJson(route.old_move)},
                         {"new", RouteMoveJson(route.new_move)}};
  comparison["final_terms"] = {{"entered", StringsJson(final_terms.entered)},
                               {"left", StringsJson(final_terms.left)},
                               {"kept", StringsJson(final_terms.kept)}};
  comparison["coefficients"] = std::move(coefficients_json);
  comparison["coefficient_mark_in_se"] = coefficient_mark_in_se;
  comparison["coefficients_only_old"] = StringsJson(coefficients_only_old);
  comparison["coefficients_only_new"] = StringsJson(coefficients_only_new);
  comparison["prediction"] = prediction;
  json inclusion = json::array();
  for (const InclusionChange& change : validation.inclusion) {
    inclusion.push_back({{"term", change.term},
                         {"old", NumberOrNull(change.old_frequency)},
                         {"new", NumberOrNull(change.new_frequency)}});
  }
  json validation_json = {{"folds_compared", validation.folds_compared},
                          {"holdout_compared", validation.holdout_compared},
                          {"inclusion_compared", validation.inclusion_compared},
                          {"inclusion", std::move(inclusion)}};
  if (validation.folds_compared) {
    validation_json["folds_rmse"] = {{"old", NumberOrNull(validation.old_folds_rmse)},
                                     {"new", NumberOrNull(validation.new_folds_rmse)}};
  }
  if (validation.holdout_compared) {
    validation_json["holdout_rmse"] = {{"old", NumberOrNull(validation.old_holdout_rmse)},
                                       {"new", NumberOrNull(validation.new_holdout_rmse)}};
  }
  comparison["validation"] = std::move(validation_json);
  comparison["verdict"] = ToString(verdict);
  comparison["models_differ"] = ModelsDiffer();
  return comparison;
}

json PredictionComparison(const json& old_as_read, const json& new_as_read,
                          const DataSet& new_data, const CsvOptions& csv_in) {
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  try {
    // The same model and the same pricing path as `predict`.
    const FittedModel fitted = FittedModelFromAudit(old_audit, "old audit");
    const Predictor predictor(MakePricingModel(fitted));
    const Design& design = predictor.design();
    CsvOptions csv = csv_in;
    csv.missing_tokens = fitted.missing_tokens;
    const bool logged = design.response_transform == ResponseTransform::kLog;

    double weighted_squares = 0, weighted_errors = 0, weight_sum = 0;
    std::uint64_t rows_read = 0, rows = 0, response_unusable = 0;
    std::map<PredictionFlag, std::uint64_t> not_priced;
    // One row, read through RowCells (a CSV record or a row of columns in memory).
    const auto price = [&](const PredictionRowEvaluator& evaluator, const RowCells& cells, std::size_t response_index) {
      ++rows_read;
      const PredictedRow row = predictor.Predict(evaluator.Evaluate(cells));
      if (!row.priced()) {
        // Counted under the first problem, as predict lists them.
        ++not_priced[row.problems.empty() ? PredictionFlag::kInvalidValue : row.problems.front().flag];
        return;
      }
      const RowCell response = cells.Cell(response_index);
      double observed = response.number;
      if (response.kind != CellKind::kNumber || (logged && !(observed > 0))) {
        ++response_unusable;
        return;
      }
      if (logged) observed = std::log(observed);
      const double error = observed - *row.prediction;
      weighted_squares += row.weight * error * error;
      weighted_errors += row.weight * error;
      weight_sum += row.weight;
      ++rows;
    };
    const auto no_response = [&](const std::string& name) -> json {
      return {{"available", false}, {"reason", name + ": no column '" + design.response + "' (the response) in the header"}};
    };
    if (new_data.columns) {
      // Columns in memory: the same evaluator, a chunk of rows at a time.
      ColumnRows rows_in_memory(*new_data.columns);
      const PredictionRowEvaluator evaluator(design, rows_in_memory);
      const std::ptrdiff_t response_index = rows_in_memory.ColumnIndex(design.response);
      if (response_index < 0) return no_response(rows_in_memory.display_name());
      while (rows_in_memory.Next()) price(evaluator, rows_in_memory, static_cast<std::size_t>(response_index));
    } else {
      // Every file of a data set in reading order, each read by its own reader bound to its header.
      for (const std::filesystem::path& file : DataSetFiles(new_data)) {
        CsvReader reader(file, csv);
        const PredictionRowEvaluator evaluator(design, reader);
        const std::ptrdiff_t response_index = reader.ColumnIndex(design.response);
        if (response_index < 0) return no_response(file.string());
        CsvRecord record;
        while (reader.Next(record)) {
          price(evaluator, CsvRowCells(reader, record), static_cast<std::size_t>(response_index));
        }
      }
    }
    json not_priced_counts = json::object();
    for (const PredictionFlag flag : {PredictionFlag::kUnknownLevel, PredictionFlag::kMissing,
                                      PredictionFlag::kInvalidValue}) {
      not_priced_counts[ToString(flag)] = not_priced[flag];
    }
    if (rows == 0 || weight_sum <= 0) {
      return {{"available", false},
              {"rows_read", rows_read},
              {"not_priced", not_priced_counts},
              {"response_unusable", response_unusable},
              {"reason", "no row of the new data could be priced by the old model with a usable response"}};
    }
    const AuditReader new_reader("new audit");
    const json& new_model = new_reader.Object(new_audit, "", "model");
    const auto new_rss = new_reader.OptionalNumber(new_model, "model", "rss");
    const auto new_weight_sum = new_reader.OptionalNumber(new_model, "model", "weight_sum");
    std::optional<double> new_rmse;
    if (new_rss && new_weight_sum && *new_weight_sum > 0) new_rmse = std::sqrt(*new_rss / *new_weight_sum);
    return {{"available", true},
            {"rows_read", rows_read},
            {"rows", rows},
            {"not_priced", not_priced_counts},
            {"unseen_level_rows", not_priced[PredictionFlag::kUnknownLevel]},
            {"response_unusable", response_unusable},
            {"old_model_rmse", std::sqrt(weighted_squares / weight_sum)},
            {"old_model_mean_error", weighted_errors / weight_sum},
            {"new_model_rmse", NumberOrNull(new_rmse)},
            {"response_transform", ToString(design.response_transform)},
            {"note", "root mean squared error of the (transformed) response over the new rows the old "
                     "model could price (as predict prices them: a row with a level the old model never "
                     "saw is not priced); the old model predicts out of sample, the new model's figure "
                     "is in-sample"}};
  } catch (const InputError& error) {
    return {{"available", false},
            {"reason", std::string("the old model cannot price the new data: ") + error.what()}};
  }
}

const char* ToString(ComparisonVerdict verdict) {
  switch (verdict) {
    case ComparisonVerdict::kSameModel: return "same model";
    case ComparisonVerdict::kSameTermsRefitted: return "same terms, refitted coefficients";
    case ComparisonVerdict::kDifferentTerms: return "different terms";
  }
  return "different terms";
}

std::optional<ComparisonVerdict> ComparisonVerdictFromString(std::string_view text) {
  for (const ComparisonVerdict verdict : {ComparisonVerdict::kSameModel, ComparisonVerdict::kSameTermsRefitted,
                                          ComparisonVerdict::kDifferentTerms}) {
    if (text == ToString(verdict)) return verdict;
  }
  return std::nullopt;
}

}  // namespace stepledger

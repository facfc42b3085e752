#include "stepledger/audit/audit_compare.h"

#include "audit_compare_internal.h"

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

const json& Section(const json& audit, const char* key, const char* which) {
  if (!audit.is_object() || !audit.contains(key)) {
    throw InputError(std::string(which) + " audit: key '" + key + "' is missing");
  }
  return audit[key];
}



std::optional<double> Number(const json& object, const char* key) {
  if (!object.is_object() || !object.contains(key) || !object[key].is_number()) return std::nullopt;
  return object[key].get<double>();
}

std::vector<std::string> Strings(const json& array) {
  std::vector<std::string> out;
  if (!array.is_array()) return out;
  for (const json& item : array) {
    if (item.is_string()) out.push_back(item.get<std::string>());
  }
  return out;
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
double ShiftInOldSd(const json& before, const json& after, double tolerance) {
  const auto old_sd = Number(before, "sd");
  const auto old_mean = Number(before, "mean"), new_mean = Number(after, "mean");
  const auto old_min = Number(before, "min"), new_min = Number(after, "min");
  const auto old_max = Number(before, "max"), new_max = Number(after, "max");
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

std::optional<std::string> StringOrEmpty(const json& object, const char* key) {
  if (!object.is_object() || !object.contains(key) || !object[key].is_string()) return std::nullopt;
  return object[key].get<std::string>();
}

std::optional<std::int64_t> CountOrEmpty(const json& object, const char* key) {
  if (!object.is_object() || !object.contains(key) || !object[key].is_number_integer()) return std::nullopt;
  return object[key].get<std::int64_t>();
}

json StringOrNull(const std::optional<std::string>& value) { return value ? json(*value) : json(nullptr); }

json StringsJson(const std::vector<std::string>& names) {
  json array = json::array();
  for (const std::string& name : names) array.push_back(name);
  return array;
}

ColumnsComparisonPart ColumnsComparison(const json& old_data, const json& new_data, const CompareOptions& options) {
  std::map<std::string, json> old_columns, new_columns;
  std::vector<std::string> old_order, new_order;
  for (const json& column : old_data.value("columns", json::array())) {
    old_columns[column.value("name", "")] = column;
    old_order.push_back(column.value("name", ""));
  }
  for (const json& column : new_data.value("columns", json::array())) {
    new_columns[column.value("name", "")] = column;
    new_order.push_back(column.value("name", ""));
  }
  ColumnsComparisonPart columns;
  columns.moved_threshold_in_old_sd = options.column_shift_in_old_sd;
  for (const std::string& name : new_order) {
    if (!old_columns.count(name)) columns.added.push_back(name);
  }
  for (const std::string& name : old_order) {
    if (!new_columns.count(name)) {
      columns.lost.push_back(name);
      continue;
    }
    const json& before = old_columns[name];
    const json& after = new_columns[name];
    if (before.value("type", "") != after.value("type", "")) {
      columns.type_changed.push_back({name, before.value("type", ""), after.value("type", "")});
      continue;
    }
    if (before.value("type", "") != "numeric") continue;
    ++columns.numeric_compared;
    const double shift = ShiftInOldSd(before, after, options.relative_tolerance);
    if (shift <= options.column_shift_in_old_sd) continue;
    MovedColumn entry;
    entry.column = name;
    const auto summary = [](const json& source) {
      return json{{"min", source.value("min", json(nullptr))},
                  {"max", source.value("max", json(nullptr))},
                  {"mean", source.value("mean", json(nullptr))},
                  {"sd", source.value("sd", json(nullptr))}};
    };
    entry.old_summary = summary(before);
    entry.new_summary = summary(after);
    const auto old_mean = Number(before, "mean");
    const auto new_mean = Number(after, "mean");
    const auto old_sd = Number(before, "sd");
    if (old_mean && new_mean && old_sd && *old_sd > 0) entry.mean_shift_in_old_sd = (*new_mean - *old_mean) / *old_sd;
    if (std::isfinite(shift)) entry.shift_in_old_sd = shift;
    columns.moved.push_back(std::move(entry));
  }
  return columns;
}

// Keys of the two normalised plans whose values differ, in the new plan's key order. A key
// only one side records (an audit of an older format) is not compared.
PlanComparisonPart PlanComparison(const json& old_audit, const json& new_audit) {
  PlanComparisonPart part;
  const json* old_plan = nullptr;
  const json* new_plan = nullptr;
  if (old_audit.contains("plan") && old_audit["plan"].is_object()) {
    const json& plan = old_audit["plan"];
    if (plan.contains("normalised") && plan["normalised"].is_object()) old_plan = &plan["normalised"];
  }
  if (new_audit.contains("plan") && new_audit["plan"].is_object()) {
    const json& plan = new_audit["plan"];
    if (plan.contains("normalised") && plan["normalised"].is_object()) new_plan = &plan["normalised"];
  }
  if (old_plan == nullptr || new_plan == nullptr) return part;
  part.compared = true;
  for (const auto& [key, new_value] : new_plan->items()) {
    if (!old_plan->contains(key)) continue;
    const json& old_value = (*old_plan)[key];
    if (old_value != new_value) part.differences.push_back({key, old_value, new_value});
  }
  return part;
}

RouteMove StepMove(const json& step) { return {StringOrEmpty(step, "action"), StringOrEmpty(step, "term")}; }

RouteComparisonPart RouteComparison(const json& old_steps, const json& new_steps) {
  RouteComparisonPart route;
  const std::size_t common = std::min(old_steps.size(), new_steps.size());
  for (std::size_t index = 0; index < common; ++index) {
    const RouteMove a = StepMove(old_steps[index]);
    const RouteMove b = StepMove(new_steps[index]);
    if (a != b) return {false, index, a, b};
  }
  if (old_steps.size() != new_steps.size()) {
    route.same = false;
    route.first_difference_step = common;
    if (common < old_steps.size()) route.old_move = StepMove(old_steps[common]);
    if (common < new_steps.size()) route.new_move = StepMove(new_steps[common]);
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

CoefficientChanges CompareCoefficients(const json& old_model, const json& new_model, const CompareOptions& options) {
  const double tolerance = options.relative_tolerance;
  CoefficientChanges changes;
  std::map<std::string, json> new_coefficients;
  std::vector<std::string> new_names;
  for (const json& coefficient : new_model.value("coefficients", json::array())) {
    new_coefficients[coefficient.value("name", "")] = coefficient;
    new_names.push_back(coefficient.value("name", ""));
  }
  std::vector<std::string> old_names;
  for (const json& before : old_model.value("coefficients", json::array())) {
    const std::string name = before.value("name", "");
    old_names.push_back(name);
    if (!new_coefficients.count(name)) {
      changes.only_old.push_back(name);
      continue;
    }
    const json& after = new_coefficients[name];
    CoefficientChange entry;
    entry.name = name;
    entry.old_estimate = Number(before, "estimate");
    entry.new_estimate = Number(after, "estimate");
    entry.old_se = Number(before, "se");
    entry.new_se = Number(after, "se");
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

// The prediction error needs the new rows; a rerun records it in the new audit.
json RecordedPrediction(const json& old_audit, const json& new_audit) {
  json prediction = {{"available", false},
                     {"reason", "needs the new rows: run 'stepledger rerun' or give compare --data"}};
  if (new_audit.contains("comparison") && new_audit["comparison"].is_object() &&
      new_audit["comparison"].value("old_seal", json(nullptr)) == old_audit.value("seal", json(nullptr)) &&
      new_audit["comparison"].contains("prediction")) {
    prediction = new_audit["comparison"]["prediction"];
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

}  // namespace

AuditComparison CompareAudits(const json& old_as_read, const json& new_as_read, const CompareOptions& options) {
  // Both in today's names, so that an audit of an older format_version compares like with like.
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  const json& old_data = Section(old_audit, "data", "old");
  const json& new_data = Section(new_audit, "data", "new");
  const json& old_model = Section(old_audit, "model", "old");
  const json& new_model = Section(new_audit, "model", "new");

  AuditComparison comparison;
  comparison.old_seal = StringOrEmpty(old_audit, "seal");
  comparison.old_data_sha256 = StringOrEmpty(old_data, "sha256");
  comparison.new_data_sha256 = StringOrEmpty(new_data, "sha256");
  comparison.same_data = old_data.value("sha256", json(nullptr)) == new_data.value("sha256", json(nullptr));
  comparison.plan = PlanComparison(old_audit, new_audit);
  comparison.columns = ColumnsComparison(old_data, new_data, options);
  comparison.rows = {CountOrEmpty(old_data, "rows_used"), CountOrEmpty(new_data, "rows_used")};
  comparison.route = RouteComparison(old_audit.value("steps", json::array()), new_audit.value("steps", json::array()));

  const std::vector<std::string> old_terms = Strings(old_model.value("terms", json::array()));
  const std::vector<std::string> new_terms = Strings(new_model.value("terms", json::array()));
  comparison.final_terms = FinalTermsComparison(old_terms, new_terms);

  CoefficientChanges changes = CompareCoefficients(old_model, new_model, options);
  comparison.verdict = VerdictFromParts(old_terms, new_terms, changes);
  comparison.coefficients = std::move(changes.shared);
  comparison.coefficient_mark_in_se = options.coefficient_mark_in_se;
  comparison.coefficients_only_old = std::move(changes.only_old);
  comparison.coefficients_only_new = std::move(changes.only_new);
  comparison.prediction = RecordedPrediction(old_audit, new_audit);
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
  comparison["verdict"] = ToString(verdict);
  comparison["models_differ"] = ModelsDiffer();
  return comparison;
}

json PredictionComparison(const json& old_as_read, const json& new_as_read,
                          const std::filesystem::path& new_data, const CsvOptions& csv_in) {
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  try {
    // The same model and the same pricing path as `predict`.
    const FittedModel fitted = FittedModelFromAudit(old_audit, "old audit");
    const Predictor predictor(MakePricingModel(fitted));
    const Design& design = predictor.design();
    CsvOptions csv = csv_in;
    csv.missing_tokens = fitted.missing_tokens;
    CsvReader reader(new_data, csv);
    const PredictionRowEvaluator evaluator(design, reader);
    const std::ptrdiff_t response_index = reader.ColumnIndex(design.response);
    if (response_index < 0) {
      return {{"available", false},
              {"reason", new_data.string() + ": no column '" + design.response + "' (the response) in the header"}};
    }
    const bool logged = design.response_transform == ResponseTransform::kLog;

    double weighted_squares = 0, weighted_errors = 0, weight_sum = 0;
    std::uint64_t rows_read = 0, rows = 0, response_unusable = 0;
    std::map<PredictionFlag, std::uint64_t> not_priced;
    CsvRecord record;
    while (reader.Next(record)) {
      ++rows_read;
      const PredictedRow row = predictor.Predict(evaluator.Evaluate(record));
      if (!row.priced()) {
        // Counted under the first problem, as predict lists them.
        ++not_priced[row.problems.empty() ? PredictionFlag::kInvalidValue : row.problems.front().flag];
        continue;
      }
      double observed = 0;
      const CellKind kind = ClassifyCell(record.fields[static_cast<std::size_t>(response_index)].text,
                                         csv.missing_tokens, observed);
      if (kind != CellKind::kNumber || (logged && !(observed > 0))) {
        ++response_unusable;
        continue;
      }
      if (logged) observed = std::log(observed);
      const double error = observed - *row.prediction;
      weighted_squares += row.weight * error * error;
      weighted_errors += row.weight * error;
      weight_sum += row.weight;
      ++rows;
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
    const json& new_model = Section(new_audit, "model", "new");
    const auto new_rss = Number(new_model, "rss");
    const auto new_weight_sum = Number(new_model, "weight_sum");
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

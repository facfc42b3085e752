#include "stepledger/audit/audit_compare.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <sstream>

#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/profile.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

const json& Section(const json& audit, const char* key, const char* which) {
  if (!audit.is_object() || !audit.contains(key)) {
    throw InputError(std::string(which) + " audit: key '" + key + "' is missing");
  }
  return audit[key];
}

std::string Format(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.6g", value);
  return buffer;
}

std::string FormatJsonNumber(const json& value) {
  return value.is_number() ? Format(value.get<double>()) : std::string("n/a");
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

json ColumnsComparison(const json& old_data, const json& new_data, double tolerance) {
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
  json added = json::array(), lost = json::array(), type_changed = json::array(), moved = json::array();
  for (const std::string& name : new_order) {
    if (!old_columns.count(name)) added.push_back(name);
  }
  for (const std::string& name : old_order) {
    if (!new_columns.count(name)) {
      lost.push_back(name);
      continue;
    }
    const json& before = old_columns[name];
    const json& after = new_columns[name];
    if (before.value("type", "") != after.value("type", "")) {
      type_changed.push_back({{"column", name}, {"old", before.value("type", "")}, {"new", after.value("type", "")}});
      continue;
    }
    if (before.value("type", "") != "numeric") continue;
    bool changed = false;
    for (const char* key : {"min", "max", "mean"}) {
      const auto a = Number(before, key);
      const auto b = Number(after, key);
      if (a.has_value() != b.has_value() || (a && !NumbersAgree(*a, *b, tolerance))) changed = true;
    }
    if (!changed) continue;
    json entry{{"column", name}};
    for (const char* side : {"old", "new"}) {
      const json& source = std::string(side) == "old" ? before : after;
      entry[side] = {{"min", source.value("min", json(nullptr))},
                     {"max", source.value("max", json(nullptr))},
                     {"mean", source.value("mean", json(nullptr))},
                     {"sd", source.value("sd", json(nullptr))}};
    }
    const auto old_mean = Number(before, "mean");
    const auto new_mean = Number(after, "mean");
    const auto old_sd = Number(before, "sd");
    entry["mean_shift_in_old_sd"] = (old_mean && new_mean && old_sd && *old_sd > 0)
                                        ? json((*new_mean - *old_mean) / *old_sd)
                                        : json(nullptr);
    moved.push_back(std::move(entry));
  }
  return {{"added", added}, {"lost", lost}, {"type_changed", type_changed}, {"moved", moved}};
}

json StepMove(const json& step) {
  return {{"action", step.value("action", json(nullptr))}, {"term", step.value("term", json(nullptr))}};
}

json RouteComparison(const json& old_steps, const json& new_steps) {
  const std::size_t common = std::min(old_steps.size(), new_steps.size());
  for (std::size_t index = 0; index < common; ++index) {
    const json a = StepMove(old_steps[index]);
    const json b = StepMove(new_steps[index]);
    if (a != b) {
      return {{"same", false}, {"first_difference_step", index}, {"old", a}, {"new", b}};
    }
  }
  if (old_steps.size() != new_steps.size()) {
    return {{"same", false},
            {"first_difference_step", common},
            {"old", common < old_steps.size() ? StepMove(old_steps[common]) : json(nullptr)},
            {"new", common < new_steps.size() ? StepMove(new_steps[common]) : json(nullptr)}};
  }
  return {{"same", true}, {"first_difference_step", nullptr}, {"old", nullptr}, {"new", nullptr}};
}

}  // namespace

json CompareAudits(const json& old_as_read, const json& new_as_read, const CompareOptions& options) {
  // Both in today's names, so that an audit of an older format_version compares like with like.
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  const double tolerance = options.relative_tolerance;
  const json& old_data = Section(old_audit, "data", "old");
  const json& new_data = Section(new_audit, "data", "new");
  const json& old_model = Section(old_audit, "model", "old");
  const json& new_model = Section(new_audit, "model", "new");

  json comparison;
  comparison["old_seal"] = old_audit.value("seal", json(nullptr));
  comparison["old_data_sha256"] = old_data.value("sha256", json(nullptr));
  comparison["new_data_sha256"] = new_data.value("sha256", json(nullptr));
  comparison["same_data"] = old_data.value("sha256", json(nullptr)) == new_data.value("sha256", json(nullptr));
  comparison["columns"] = ColumnsComparison(old_data, new_data, tolerance);
  comparison["rows"] = {{"old_rows_used", old_data.value("rows_used", json(nullptr))},
                        {"new_rows_used", new_data.value("rows_used", json(nullptr))}};
  comparison["route"] = RouteComparison(old_audit.value("steps", json::array()),
                                        new_audit.value("steps", json::array()));

  const std::vector<std::string> old_terms = Strings(old_model.value("terms", json::array()));
  const std::vector<std::string> new_terms = Strings(new_model.value("terms", json::array()));
  json entered = json::array(), left = json::array(), kept = json::array();
  for (const std::string& term : new_terms) {
    if (!Contains(old_terms, term)) entered.push_back(term);
  }
  for (const std::string& term : old_terms) {
    (Contains(new_terms, term) ? kept : left).push_back(term);
  }
  comparison["final_terms"] = {{"entered", entered}, {"left", left}, {"kept", kept}};

  std::map<std::string, json> new_coefficients;
  std::vector<std::string> new_names;
  for (const json& coefficient : new_model.value("coefficients", json::array())) {
    new_coefficients[coefficient.value("name", "")] = coefficient;
    new_names.push_back(coefficient.value("name", ""));
  }
  json coefficients = json::array(), only_old = json::array(), only_new = json::array();
  bool estimates_differ = false;
  std::vector<std::string> old_names;
  for (const json& before : old_model.value("coefficients", json::array())) {
    const std::string name = before.value("name", "");
    old_names.push_back(name);
    if (!new_coefficients.count(name)) {
      only_old.push_back(name);
      continue;
    }
    const json& after = new_coefficients[name];
    const auto old_estimate = Number(before, "estimate");
    const auto new_estimate = Number(after, "estimate");
    const auto old_se = Number(before, "se");
    const auto new_se = Number(after, "se");
    json entry{{"name", name},
               {"old_estimate", NumberOrNull(old_estimate)},
               {"new_estimate", NumberOrNull(new_estimate)},
               {"old_se", NumberOrNull(old_se)},
               {"new_se", NumberOrNull(new_se)}};
    std::optional<double> in_old_se, in_joint_se;
    if (old_estimate && new_estimate) {
      const double change = *new_estimate - *old_estimate;
      if (!NumbersAgree(*old_estimate, *new_estimate, tolerance)) estimates_differ = true;
      if (old_se && *old_se > 0) in_old_se = change / *old_se;
      if (old_se && new_se && (*old_se > 0 || *new_se > 0)) {
        in_joint_se = change / std::sqrt(*old_se * *old_se + *new_se * *new_se);
      }
    }
    entry["change_in_old_se"] = NumberOrNull(in_old_se);
    entry["change_in_joint_se"] = NumberOrNull(in_joint_se);
    coefficients.push_back(std::move(entry));
  }
  for (const std::string& name : new_names) {
    if (!Contains(old_names, name)) only_new.push_back(name);
  }
  comparison["coefficients"] = coefficients;
  comparison["coefficients_only_old"] = only_old;
  comparison["coefficients_only_new"] = only_new;

  // The prediction error needs the new rows; a rerun records it in the new audit.
  json prediction = {{"available", false},
                     {"reason", "needs the new rows: run 'stepledger rerun' or give compare --data"}};
  if (new_audit.contains("comparison") && new_audit["comparison"].is_object() &&
      new_audit["comparison"].value("old_seal", json(nullptr)) == old_audit.value("seal", json(nullptr)) &&
      new_audit["comparison"].contains("prediction")) {
    prediction = new_audit["comparison"]["prediction"];
  }
  comparison["prediction"] = prediction;
  comparison["models_differ"] = old_terms != new_terms || !only_old.empty() || !only_new.empty() ||
                                estimates_differ;
  return comparison;
}

json PredictionComparison(const json& old_as_read, const json& new_as_read,
                          const std::filesystem::path& new_data, const CsvOptions& csv_in) {
  const json old_audit = AuditInCurrentShape(old_as_read);
  const json new_audit = AuditInCurrentShape(new_as_read);
  try {
    const json& normalised = Section(Section(old_audit, "plan", "old"), "normalised", "old plan");
    const Plan plan = PlanFromJson(normalised);
    CsvOptions csv = csv_in;
    csv.missing_tokens = plan.missing_tokens;
    const DataProfile profile = ProfileCsv(new_data, csv);
    const Design design = BuildDesign(plan.design, profile);

    const json& old_model = Section(old_audit, "model", "old");
    std::vector<std::pair<std::size_t, double>> beta;  // design column, estimate
    std::vector<bool> has_coefficient(design.column_count(), false);
    for (const json& coefficient : old_model.value("coefficients", json::array())) {
      const std::string name = coefficient.value("name", "");
      for (std::size_t column = 0; column < design.column_count(); ++column) {
        if (design.columns[column].name == name && coefficient["estimate"].is_number()) {
          beta.emplace_back(column, coefficient["estimate"].get<double>());
          has_coefficient[column] = true;
        }
      }
    }
    // Columns of the old model's categorical terms that the old model never saw (new levels):
    // such rows are predicted at the baseline, and counted.
    std::vector<std::size_t> unseen_columns;
    const std::vector<std::string> old_terms = Strings(old_model.value("terms", json::array()));
    for (std::size_t column = 0; column < design.column_count(); ++column) {
      const std::size_t term = design.columns[column].term;
      if (term == kNoTerm || has_coefficient[column]) continue;
      if (Contains(old_terms, design.terms[term].name)) unseen_columns.push_back(column);
    }

    double weighted_squares = 0, weighted_errors = 0, weight_sum = 0;
    std::uint64_t rows = 0, unseen_rows = 0;
    ForEachUsedRow(new_data, design, csv, [&](const UsedRow& row) {
      double fitted = 0;
      for (const auto& [column, estimate] : beta) fitted += estimate * row.x[column];
      const double error = row.y - fitted;
      weighted_squares += row.weight * error * error;
      weighted_errors += row.weight * error;
      weight_sum += row.weight;
      ++rows;
      for (std::size_t column : unseen_columns) {
        if (row.x[column] != 0) {
          ++unseen_rows;
          break;
        }
      }
    });
    if (rows == 0 || weight_sum <= 0) {
      return {{"available", false}, {"reason", "no usable rows for the old model in the new data"}};
    }
    const json& new_model = Section(new_audit, "model", "new");
    const auto new_rss = Number(new_model, "rss");
    const auto new_weight_sum = Number(new_model, "weight_sum");
    std::optional<double> new_rmse;
    if (new_rss && new_weight_sum && *new_weight_sum > 0) new_rmse = std::sqrt(*new_rss / *new_weight_sum);
    return {{"available", true},
            {"rows", rows},
            {"old_model_rmse", std::sqrt(weighted_squares / weight_sum)},
            {"old_model_mean_error", weighted_errors / weight_sum},
            {"new_model_rmse", NumberOrNull(new_rmse)},
            {"unseen_level_rows", unseen_rows},
            {"response_transform", ToString(design.response_transform)},
            {"note", "root mean squared error of the (transformed) response over the new rows; the "
                     "old model predicts out of sample, the new model's figure is in-sample"}};
  } catch (const InputError& error) {
    return {{"available", false},
            {"reason", std::string("the old plan cannot be applied to the new data: ") + error.what()}};
  }
}

bool FinalModelsDiffer(const json& comparison) { return comparison.value("models_differ", true); }

std::string ComparisonReport(const json& comparison) {
  std::ostringstream text;
  auto names = [](const json& array) {
    std::string joined;
    for (const json& item : array) joined += (joined.empty() ? "" : ", ") + (item.is_string() ? item.get<std::string>() : item.dump());
    return joined.empty() ? std::string("none") : joined;
  };
  text << "Comparison with the old run";
  if (comparison.value("old_seal", json(nullptr)).is_string()) {
    text << " (seal " << comparison["old_seal"].get<std::string>().substr(0, 16) << "...)";
  }
  text << "\n";
  text << "  data: " << (comparison.value("same_data", false) ? "the same bytes" : "different bytes") << "\n";
  const json& columns = comparison["columns"];
  text << "  columns added: " << names(columns["added"]) << "\n";
  text << "  columns lost: " << names(columns["lost"]) << "\n";
  if (!columns["type_changed"].empty()) {
    text << "  columns whose type changed:";
    for (const json& entry : columns["type_changed"]) {
      text << " " << entry.value("column", "") << " (" << entry.value("old", "") << " -> "
           << entry.value("new", "") << ")";
    }
    text << "\n";
  }
  for (const json& entry : columns["moved"]) {
    text << "  moved: " << entry.value("column", "") << ": mean " << FormatJsonNumber(entry["old"]["mean"])
         << " -> " << FormatJsonNumber(entry["new"]["mean"]);
    if (entry["mean_shift_in_old_sd"].is_number()) {
      text << " (" << Format(entry["mean_shift_in_old_sd"].get<double>()) << " old SD)";
    }
    text << ", range " << FormatJsonNumber(entry["old"]["min"]) << " to " << FormatJsonNumber(entry["old"]["max"])
         << " -> " << FormatJsonNumber(entry["new"]["min"]) << " to " << FormatJsonNumber(entry["new"]["max"])
         << "\n";
  }
  text << "  rows used: " << comparison["rows"]["old_rows_used"].dump() << " -> "
       << comparison["rows"]["new_rows_used"].dump() << "\n";
  const json& route = comparison["route"];
  if (route.value("same", false)) {
    text << "  route: the same actions and terms at every step\n";
  } else {
    auto move = [](const json& step) {
      if (!step.is_object()) return std::string("(no step)");
      std::string out = step.value("action", json(nullptr)).is_string() ? step["action"].get<std::string>() : "?";
      if (step["term"].is_string()) out += " " + step["term"].get<std::string>();
      return out;
    };
    text << "  route: parts at step " << route["first_difference_step"].dump() << ": old "
         << move(route["old"]) << ", new " << move(route["new"]) << "\n";
  }
  text << "  terms entered the final model: " << names(comparison["final_terms"]["entered"]) << "\n";
  text << "  terms left the final model: " << names(comparison["final_terms"]["left"]) << "\n";
  if (!comparison["coefficients"].empty()) {
    text << "  coefficient changes (new - old, in units of the old SE):\n";
    for (const json& entry : comparison["coefficients"]) {
      char line[256];
      std::snprintf(line, sizeof line, "    %-24s %12s -> %-12s %s\n", entry.value("name", "").c_str(),
                    FormatJsonNumber(entry["old_estimate"]).c_str(),
                    FormatJsonNumber(entry["new_estimate"]).c_str(),
                    entry["change_in_old_se"].is_number()
                        ? (Format(entry["change_in_old_se"].get<double>()) + " SE").c_str()
                        : "n/a");
      text << line;
    }
  }
  const json& prediction = comparison["prediction"];
  if (prediction.value("available", false)) {
    text << "  old model on the new rows: RMSE " << FormatJsonNumber(prediction["old_model_rmse"])
         << " (mean error " << FormatJsonNumber(prediction["old_model_mean_error"])
         << "), beside the new model's RMSE " << FormatJsonNumber(prediction["new_model_rmse"]) << " over "
         << prediction["rows"].dump() << " rows";
    if (prediction.value("unseen_level_rows", 0) > 0) {
      text << "; " << prediction["unseen_level_rows"].dump() << " rows have levels the old model never saw";
    }
    text << "\n";
  } else {
    text << "  old model on the new rows: not available (" << prediction.value("reason", "") << ")\n";
  }
  text << (FinalModelsDiffer(comparison) ? "The final models differ.\n" : "The final models are the same.\n");
  return text.str();
}

}  // namespace stepledger

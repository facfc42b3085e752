#include "stepledger/audit/prediction_json.h"

#include <cmath>
#include <optional>

namespace stepledger {
namespace {

nlohmann::json Json(const std::optional<double>& value) {
  if (!value || !std::isfinite(*value)) return nullptr;
  return *value;
}

nlohmann::json IntervalJson(const std::optional<PredictionInterval>& interval, bool low) {
  if (!interval) return nullptr;
  return Json(low ? interval->low : interval->high);
}

}  // namespace

nlohmann::json PredictedRowJson(const PredictedRow& row, const std::string* id) {
  nlohmann::json json = {{"row", row.row_index + 1}, {"line", row.line}};
  if (id != nullptr) json["id"] = *id;
  json["prediction"] = Json(row.prediction);
  json["se_mean"] = Json(row.se_mean);
  json["ci_low"] = IntervalJson(row.ci, true);
  json["ci_high"] = IntervalJson(row.ci, false);
  json["pi_low"] = IntervalJson(row.pi, true);
  json["pi_high"] = IntervalJson(row.pi, false);
  if (row.back) {
    json["back_transformed"] = {{"median", Json(row.back->median)},
                                {"ci_low", IntervalJson(row.back->ci, true)},
                                {"ci_high", IntervalJson(row.back->ci, false)},
                                {"pi_low", IntervalJson(row.back->pi, true)},
                                {"pi_high", IntervalJson(row.back->pi, false)},
                                {"mean", Json(row.back->mean)}};
  } else {
    json["back_transformed"] = nullptr;
  }
  json["leverage"] = Json(row.leverage);
  json["weight"] = row.weight;
  nlohmann::json flags = nlohmann::json::array();
  for (const PredictionFlag flag : row.flags) flags.push_back(ToString(flag));
  json["flags"] = std::move(flags);
  nlohmann::json outside = nlohmann::json::array();
  for (const OutsideRange& range : row.outside_range) {
    outside.push_back({{"column", range.column},
                       {"term", range.term},
                       {"kind", ToString(range.kind)},
                       {"value", Json(range.value)},
                       {"min", Json(range.min)},
                       {"max", Json(range.max)}});
  }
  json["outside_range"] = std::move(outside);
  nlohmann::json problems = nlohmann::json::array();
  for (const RowProblem& problem : row.problems) {
    problems.push_back({{"flag", ToString(problem.flag)},
                        {"column", problem.column},
                        {"term", problem.term.empty() ? nlohmann::json(nullptr) : nlohmann::json(problem.term)},
                        {"text", problem.text},
                        {"where", problem.where},
                        {"reason", problem.reason}});
  }
  json["problems"] = std::move(problems);
  json["detail"] = row.Detail();
  return json;
}

}  // namespace stepledger

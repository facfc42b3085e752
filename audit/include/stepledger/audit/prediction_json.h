#pragma once
// One priced row as JSON: a row of `predict --json` and of the Python module's `predict`.

#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/engine/prediction.h"

namespace stepledger {

/// {row, line, id (when id is given), prediction, se_mean, ci_low, ci_high, pi_low, pi_high,
/// back_transformed, leverage, weight, flags, outside_range, problems, detail}; numbers that are
/// undefined or not finite are null.
nlohmann::json PredictedRowJson(const PredictedRow& row, const std::string* id = nullptr);

}  // namespace stepledger

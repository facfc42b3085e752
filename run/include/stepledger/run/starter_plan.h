#pragma once
// What `profile` proposes from a data profile: a starter plan to edit, the notes beside it, and
// each column as JSON. Shared by the command line (`stepledger profile`) and the Python module's
// `profile`, so that both propose the same plan.

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/engine/limits.h"
#include "stepledger/engine/profile.h"

namespace stepledger {

struct StarterPlan {
  nlohmann::ordered_json plan;     ///< null without a response
  std::vector<std::string> notes;  ///< hints (a text cell in a column of numbers, columns left out)
};

/// The starter plan for `response` (empty: no plan, only the notes): numeric columns as terms,
/// categorical columns against their most frequent level (ties: byte-wise first), columns that
/// cannot be terms left out with a note (ReasonNotACandidateTerm at the default level limit).
/// The response is never guessed. Throws InputError starting with option_name ("--response")
/// when the response is not a column or not numeric.
StarterPlan MakeStarterPlan(const DataProfile& profile, const std::string& response, const InputLimits& limits,
                            const std::string& option_name = "--response");

/// The plan as a file a person edits: one term per line.
std::string StarterPlanText(const nlohmann::ordered_json& plan);

/// {name, kind, present, missing, then min, max, mean, sd (numeric) or levels, too_many_levels
/// (categorical)}: a column of `profile --json`.
nlohmann::ordered_json ColumnProfileJson(const ColumnProfile& column);

}  // namespace stepledger

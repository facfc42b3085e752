#pragma once
// The plan file (CONTRACT.md "Plan file (JSON)") to a Plan and back.
//
// Reading is strict: every error is a PlanError whose key_path() names the offending key
// ("terms[2].power.degree") and whose message says what was expected and what was found.
// Unknown keys are errors at every level. Malformed JSON names the file, line and column.
//
// Keys and their rules:
//   response          string, required, non-empty
//   response_transform "none" (default) or "log"
//   intercept         bool, default true
//   weights           string (a numeric column) or null (default: no weights)
//   terms             required: a non-empty array of term objects, or the string "all"
//                     (every column but the response and the weights, categorical where
//                     not numeric; columns that cannot be terms are left out, see max_levels)
//   keep, never       arrays of term names (default empty); with explicit terms they must name
//                     terms of the plan and no term may be in both; with "all" they are checked
//                     against the design by ValidateSearchOptions (selection/search.h)
//   method            "forward", "backward", "stepwise" (default), "all-subsets", "none"
//   criterion         "adj-r2", "aic", "aicc", "bic" (default), "cp", "partial-f", "cv"
//   entry_p, exit_p   numbers in the open interval (0, 1); defaults 0.05 and 0.10; for stepwise by
//                     partial-f entry_p must not exceed exit_p (else a term can enter and leave
//                     in turn; selection/search.h ValidateSearchSettings holds every such rule)
//   hierarchy         bool, default true
//   max_terms         integer >= 1, or null for no limit (default); at least the size of keep
//   best_per_size     integer >= 1, default 3
//   subset_tolerance  number from 0 up to but not including 1, default 0 (exact): all-subsets
//                     may cut a subtree that cannot beat the kept models by more than this
//                     fraction of their RSS (SearchOptions::subset_tolerance)
//   folds             integer from 2 to 100 (kMinFolds..kMaxFolds, engine/resampling.h),
//                     default 10: the cross-validation folds
//   seed              unsigned 64-bit integer (0 to 2^64 - 1, read exactly), default 1: the
//                     seed of the fold assignment
//   holdout           null (default: no holdout) or an object {"fraction": number strictly
//                     between 0 and 1 (default 0.2), "seed": unsigned 64-bit integer (default 7)}
//   bootstrap         null (default: no bootstrap) or an object {"replicates": integer from 1 to
//                     100000 (kMaxReplicates; default 200), "seed": unsigned 64-bit integer
//                     (default 11)}
//                     Inside holdout and bootstrap a key left out takes its default and an unknown
//                     key is an error naming it ("holdout.share"). The reader checks the types (and
//                     refuses an integer the setting cannot hold); the ranges of folds, fraction and
//                     replicates are checked by ValidateSearchSettings, like entry_p's.
//   missing           array of strings: cell texts meaning missing; default ["", "NA"]
//   max_levels        integer >= 2, default 100: most levels a categorical term may have. An
//                     explicit categorical term over it is refused (raise it, or leave the
//                     column out); with "all", such a column and one that looks like an
//                     identifier (every value distinct) are left out and named in a note
// A term object has "name" (non-empty, unique, not "intercept") and exactly one of
//   "column": C                                a numeric column as it is
//   "power": {"column": C, "degree": D}        C^D, D an integer from 2 to 12 (kMaxPowerDegree)
//   "log": C                                   natural log of C (values must be > 0)
//   "categorical": C, optional "baseline": L   k levels -> k-1 indicator columns, named
//                                              TERM=LEVEL ("grade=A"; format_version 1
//                                              audits wrote "grade[A]")
//   "product": [A, B]                          product of the terms named A and B (A != B)
//                                              columns A:B, with levels where a part is
//                                              categorical ("age:grade=A")
// Integers must be JSON integers (2, not 2.0).
//
// Limits (engine/limits.h, never read from the plan): a plan file larger than
// InputLimits::plan_bytes is refused before it is read, and a "terms" list longer than
// InputLimits::terms before any term is read (LimitError, naming the limit).

#include <filesystem>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/engine/design.h"
#include "stepledger/engine/limits.h"
#include "stepledger/selection/plan.h"

namespace stepledger {

/// A plan as read from its file: the parsed Plan, the file's text byte for byte (for the
/// audit's verbatim copy) and the parsed JSON.
struct LoadedPlan {
  Plan plan;
  std::string verbatim;
  nlohmann::json json;
};

/// Reads and parses a plan file. Throws PlanError (empty key path) when the file cannot be
/// read ("cannot open plan file 'x': ...") or is not JSON ("x:3:14: malformed JSON: ..."),
/// and PlanError naming the key for any content error.
LoadedPlan LoadPlanFile(const std::filesystem::path& path, const InputLimits& limits = {});

/// The same from text; source_name stands for the file name in messages.
LoadedPlan ParsePlanText(std::string text, std::string_view source_name = "plan",
                         const InputLimits& limits = {});

/// The plan of a parsed JSON value (the checks of LoadPlanFile but the JSON syntax).
Plan PlanFromJson(const nlohmann::json& json, const InputLimits& limits = {});

/// The normalised plan: every key present with its value or default (null for no weights,
/// no max_terms, no holdout and no bootstrap; holdout and bootstrap otherwise with both keys), in the form PlanFromJson reads, so PlanFromJson(PlanToJson(p)) == p.
/// Given the design built from the plan, the terms are the design's: "all" resolved into
/// the list of terms it made, and every categorical term with the baseline chosen.
nlohmann::json PlanToJson(const Plan& plan, const Design* design = nullptr);

/// The plan of the quick form `select DATA --response COL`: every other column a candidate
/// term (DesignSpec::all_terms), every other setting at its default.
Plan MakeQuickPlan(std::string response_column);


}  // namespace stepledger

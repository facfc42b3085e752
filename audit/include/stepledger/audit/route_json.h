#pragma once
// The route of a search as JSON, in the shapes of CONTRACT.md:
//   steps:   [ {index, action: start|add|remove|stop, term, criterion_value,
//               candidates: [ {term, action, df, rss, score, f, p, eligible, reason} ],
//               rule} ]
//   subsets: [ {size, terms, rss, score} ]          (all-subsets only)
// plus additive keys per step (criterion_before, rss, f, p, ties, terms: the model after the
// step) and per subset (rank). The audit adds each step's digest. Undefined numbers are null.

#include <nlohmann/json.hpp>

#include "stepledger/selection/observer.h"
#include "stepledger/selection/search.h"

namespace stepledger {

nlohmann::json CandidateToJson(const CandidateScore& candidate);
nlohmann::json StepToJson(const RouteStep& step);
nlohmann::json SubsetToJson(const SubsetRecord& subset);

/// {steps: [...], subsets: [...]} (subsets only when the method is all-subsets).
nlohmann::json RouteToJson(const SearchResult& result);

/// The search summary: {method, criterion, outcome, stop_rule, final_terms, criterion_value,
/// rss, n, tss, cp_sigma2, excluded: [{term, reason}], subsets_evaluated, subset_nodes,
/// subset_tolerance, subset_guarantee (all-subsets: SearchResult::SubsetGuarantee; else null)}.
nlohmann::json SearchSummaryToJson(const SearchResult& result);

}  // namespace stepledger

#include "stepledger/audit/route_json.h"

#include "stepledger/audit/model_json.h"

namespace stepledger {

nlohmann::json CandidateToJson(const CandidateScore& candidate) {
  nlohmann::json json{{"term", candidate.term},
                      {"action", ToString(candidate.action)},
                      {"df", candidate.df},
                      {"rss", NumberOrNull(candidate.rss)},
                      {"score", NumberOrNull(candidate.score)},
                      {"f", NumberOrNull(candidate.f)},
                      {"p", NumberOrNull(candidate.p)},
                      {"eligible", candidate.eligible},
                      {"reason", candidate.reason.empty() ? nlohmann::json(nullptr)
                                                          : nlohmann::json(candidate.reason)}};
  // Only when present (criterion cv): the candidates of other criteria keep the shape, and so
  // the step digests, of audits written before the key existed.
  if (!candidate.fold_sse.empty()) json["fold_sse"] = candidate.fold_sse;
  return json;
}

nlohmann::json StepToJson(const RouteStep& step) {
  nlohmann::json candidates = nlohmann::json::array();
  for (const auto& candidate : step.candidates) candidates.push_back(CandidateToJson(candidate));
  const bool move = step.action == StepAction::kAdd || step.action == StepAction::kRemove;
  return nlohmann::json{{"index", step.index},
                        {"action", ToString(step.action)},
                        {"term", move ? nlohmann::json(step.term) : nlohmann::json(nullptr)},
                        {"criterion_before", NumberOrNull(step.criterion_before)},
                        {"criterion_value", NumberOrNull(step.criterion_value)},
                        {"rss", NumberOrNull(step.rss)},
                        {"f", NumberOrNull(step.f)},
                        {"p", NumberOrNull(step.p)},
                        {"candidates", std::move(candidates)},
                        {"rule", step.rule},
                        {"ties", step.ties},
                        {"terms", step.model_terms}};
}

nlohmann::json SubsetToJson(const SubsetRecord& subset) {
  nlohmann::json json{{"size", subset.size},
                      {"terms", subset.terms},
                      {"rss", NumberOrNull(subset.rss)},
                      {"score", NumberOrNull(subset.score)},
                      {"rank", subset.rank_in_size}};
  if (!subset.fold_sse.empty()) json["fold_sse"] = subset.fold_sse;  // criterion cv only
  return json;
}

nlohmann::json RouteToJson(const SearchResult& result) {
  nlohmann::json steps = nlohmann::json::array();
  for (const auto& step : result.steps) steps.push_back(StepToJson(step));
  nlohmann::json route{{"steps", std::move(steps)}};
  if (result.method == Method::kAllSubsets) {
    nlohmann::json subsets = nlohmann::json::array();
    for (const auto& subset : result.subsets) subsets.push_back(SubsetToJson(subset));
    route["subsets"] = std::move(subsets);
  }
  return route;
}

nlohmann::json SearchSummaryToJson(const SearchResult& result) {
  nlohmann::json excluded = nlohmann::json::array();
  for (const auto& item : result.excluded) excluded.push_back({{"term", item.term}, {"reason", item.reason}});
  return nlohmann::json{{"method", ToString(result.method)},
                        {"criterion", ToString(result.criterion)},
                        {"outcome", ToString(result.outcome)},
                        {"stop_rule", result.stop_rule},
                        {"final_terms", result.final_terms},
                        {"criterion_value", NumberOrNull(result.final_criterion_value)},
                        {"rss", NumberOrNull(result.final_rss)},
                        {"n", CountJson(result.n)},
                        {"tss", NumberOrNull(result.tss)},
                        {"cp_sigma2", NumberOrNull(result.cp_sigma2)},
                        {"excluded", std::move(excluded)},
                        {"subsets_evaluated", result.subsets_evaluated},
                        {"subset_nodes", result.subset_nodes},
                        {"subset_tolerance", result.subset_tolerance},
                        {"subset_guarantee", result.method == Method::kAllSubsets
                                                 ? nlohmann::json(result.SubsetGuarantee())
                                                 : nlohmann::json(nullptr)}};
}

}  // namespace stepledger

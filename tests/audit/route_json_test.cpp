// The route as JSON: the shapes of CONTRACT.md (steps, candidates, subsets).

#include "stepledger/audit/route_json.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>

#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

TEST(RouteJson, StepsAndCandidatesHaveTheContractKeys) {
  const auto problem = testing::MakeRandomProblem({.seed = 2, .n = 120, .numeric_terms = 4, .true_terms = 2});
  SearchOptions options;
  options.method = Method::kForward;
  const SearchResult result = RunSearch(problem.factor, problem.design, options);
  const nlohmann::json json = RouteToJson(result);
  ASSERT_TRUE(json.contains("steps"));
  EXPECT_FALSE(json.contains("subsets"));
  ASSERT_EQ(json["steps"].size(), result.steps.size());
  const auto& start = json["steps"][0];
  EXPECT_EQ(start["action"], "start");
  EXPECT_TRUE(start["term"].is_null());
  for (const char* key : {"index", "action", "term", "criterion_value", "candidates", "rule"}) {
    EXPECT_TRUE(json["steps"][1].contains(key)) << key;
  }
  EXPECT_EQ(json["steps"][1]["term"], result.steps[1].term);
  const auto& candidate = json["steps"][1]["candidates"][0];
  EXPECT_EQ(candidate["action"], "add");
  EXPECT_TRUE(candidate["reason"].is_null());  // eligible
  EXPECT_EQ(candidate["eligible"], true);
  EXPECT_EQ(json["steps"].back()["action"], "stop");
}

TEST(RouteJson, UndefinedAndInfiniteNumbersAreNull) {
  CandidateScore candidate;
  candidate.term = "age";
  candidate.action = MoveAction::kRemove;
  candidate.f = std::numeric_limits<double>::infinity();
  candidate.reason = "keep: a kept term never leaves";
  const nlohmann::json json = CandidateToJson(candidate);
  EXPECT_TRUE(json["rss"].is_null());
  EXPECT_TRUE(json["f"].is_null());
  EXPECT_EQ(json["action"], "remove");
  EXPECT_EQ(json["reason"], "keep: a kept term never leaves");
}

TEST(RouteJson, SubsetsForAllSubsets) {
  const auto problem = testing::MakeRandomProblem({.seed = 3, .n = 80, .numeric_terms = 4, .true_terms = 2});
  SearchOptions options;
  options.method = Method::kAllSubsets;
  options.best_per_size = 2;
  const SearchResult result = RunSearch(problem.factor, problem.design, options);
  const nlohmann::json json = RouteToJson(result);
  ASSERT_TRUE(json.contains("subsets"));
  ASSERT_EQ(json["subsets"].size(), result.subsets.size());
  for (const char* key : {"size", "terms", "rss", "score"}) EXPECT_TRUE(json["subsets"][0].contains(key)) << key;
  EXPECT_EQ(json["subsets"][0]["size"], 0);
  const nlohmann::json summary = SearchSummaryToJson(result);
  EXPECT_EQ(summary["method"], "all-subsets");
  EXPECT_EQ(summary["outcome"], "completed");
}

}  // namespace
}  // namespace stepledger

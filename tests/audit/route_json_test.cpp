// The route as JSON: the shapes of CONTRACT.md (steps, candidates, subsets).

#include "stepledger/audit/route_json.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <set>
#include <string>

#include "stepledger/audit/audit_verify.h"
#include "support/audit_test_data.h"
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

// fold_sse (criterion cv) is written only when present: a candidate or subset of any other
// criterion keeps exactly the keys it had before, so its step digest is unchanged and audits
// written before the key existed still verify.
TEST(RouteJson, FoldErrorsAreWrittenOnlyWhenPresent) {
  CandidateScore candidate;
  candidate.term = "age";
  candidate.rss = 12.5;
  nlohmann::json json = CandidateToJson(candidate);
  std::set<std::string> keys;
  for (auto it = json.begin(); it != json.end(); ++it) keys.insert(it.key());
  EXPECT_EQ(keys, (std::set<std::string>{"term", "action", "df", "rss", "score", "f", "p", "eligible", "reason"}));
  candidate.fold_sse = {1.5, 0.25, 3};
  json = CandidateToJson(candidate);
  EXPECT_EQ(json["fold_sse"], nlohmann::json::array({1.5, 0.25, 3.0}));

  SubsetRecord subset;
  subset.terms = {"age"};
  EXPECT_FALSE(SubsetToJson(subset).contains("fold_sse"));
  subset.fold_sse = {2, 4};
  EXPECT_EQ(SubsetToJson(subset)["fold_sse"], nlohmann::json::array({2.0, 4.0}));
}

// An audit whose candidates carry fold_sse: the schema accepts it (and refuses a non-number in
// it), and the step digests cover it (an edit of one fold's error breaks the chain).
TEST(RouteJson, FoldErrorsAreInTheSchemaAndUnderTheStepDigests) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  const auto path = testing::WriteAuditWithLibrary(data, testing::LaptopPlan("forward", "aic"), dir.path() / "out");
  nlohmann::json document = ReadAuditFile(path);
  EXPECT_TRUE(CheckAuditIntegrity(document).Holds()) << "an audit without fold_sse verifies";
  document["steps"][1]["candidates"][0]["fold_sse"] = {10.5, 11.25, 9.0};
  SealAuditDocument(document);
  EXPECT_TRUE(CheckAuditIntegrity(document).Holds());
  const auto with_folds = dir.path() / "with_folds.json";
  testing::WriteJsonFile(with_folds, document);
  const std::string problems = testing::ValidateAuditAgainstSchema(with_folds);
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
    nlohmann::json bad = document;
    bad["steps"][1]["candidates"][0]["fold_sse"][1] = "11.25";
    const auto bad_path = dir.path() / "bad.json";
    testing::WriteJsonFile(bad_path, bad);
    EXPECT_NE(testing::ValidateAuditAgainstSchema(bad_path).find("fold_sse"), std::string::npos);
  }
  document["steps"][1]["candidates"][0]["fold_sse"][2] = 9.5;
  const VerifyReport tampered = CheckAuditIntegrity(document);
  EXPECT_EQ(tampered.chain, VerifyReport::Check::kFails);
}

}  // namespace
}  // namespace stepledger

// Constraints of every search: hierarchy, keep, never, max_terms, ties, aliased terms,
// no eligible terms, n <= k.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/selection/search.h"
#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

using testing::DenseProblem;

const CandidateScore* FindCandidate(const RouteStep& step, const std::string& term) {
  for (const auto& candidate : step.candidates) {
    if (candidate.term == term) return &candidate;
  }
  return nullptr;
}

bool Contains(const std::vector<std::string>& terms, const std::string& term) {
  return std::find(terms.begin(), terms.end(), term) != terms.end();
}

/// x1, x2, x1:x2 with a strong interaction (invented data): y = 2 x1 + 2 x2 + 3 x1 x2 + noise.
DenseProblem InteractionProblem() {
  testing::RandomProblemOptions data;
  data.seed = 31;
  data.n = 200;
  data.numeric_terms = 3;
  data.true_terms = 0;
  DenseProblem base = testing::MakeRandomProblem(data);
  arma::mat predictors = base.x.cols(1, 3);
  const arma::vec x1 = (predictors.col(0) - arma::mean(predictors.col(0))) / arma::stddev(predictors.col(0));
  const arma::vec x2 = (predictors.col(1) - arma::mean(predictors.col(1))) / arma::stddev(predictors.col(1));
  predictors.col(0) = x1;
  predictors.col(1) = x2;
  predictors.col(2) = x1 % x2;
  const arma::vec y = 2 * x1 + 2 * x2 + 3 * (x1 % x2) + base.y - arma::mean(base.y);
  return testing::MakeDenseProblem(predictors, y,
                                   {{"x1"}, {"x2"}, {"x1:x2", 1, {"x1", "x2"}, TermKind::kProduct}});
}

TEST(Hierarchy, AProductWaitsForItsPartsAndPartsWaitForTheProduct) {
  const DenseProblem problem = InteractionProblem();
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kAic;
  const SearchResult with = RunSearch(problem.factor, problem.design, options);
  // Step 1: x1:x2 would be best alone but is not eligible; the reason names the parts.
  const CandidateScore* product = FindCandidate(with.steps[1], "x1:x2");
  ASSERT_NE(product, nullptr);
  EXPECT_FALSE(product->eligible);
  EXPECT_NE(product->reason.find("hierarchy"), std::string::npos) << product->reason;
  EXPECT_NE(product->reason.find("x1"), std::string::npos) << product->reason;
  ASSERT_GE(with.steps.size(), 4u);
  EXPECT_EQ(with.steps[3].term, "x1:x2");  // after both parts
  options.hierarchy = false;
  const SearchResult without = RunSearch(problem.factor, problem.design, options);
  EXPECT_EQ(without.steps[1].term, "x1:x2");

  // Backward: the parts cannot leave while the product is in.
  options.hierarchy = true;
  options.method = Method::kBackward;
  const SearchResult backward = RunSearch(problem.factor, problem.design, options);
  const CandidateScore* part = FindCandidate(backward.steps.back(), "x1");
  ASSERT_NE(part, nullptr);
  EXPECT_FALSE(part->eligible);
  EXPECT_NE(part->reason.find("x1:x2"), std::string::npos) << part->reason;
  EXPECT_TRUE(Contains(backward.final_terms, "x1"));
}

TEST(KeepAndNever, KeptTermsNeverLeaveAndNeverTermsNeverEnter) {
  testing::RandomProblemOptions data;
  data.seed = 8;
  data.n = 300;
  data.numeric_terms = 6;
  data.true_terms = 3;
  const DenseProblem problem = testing::MakeRandomProblem(data);
  SearchOptions options;
  options.keep = {"x6"};   // pure noise, kept anyway
  options.never = {"x1"};  // the strongest term, excluded
  for (Method method : {Method::kForward, Method::kBackward, Method::kStepwise, Method::kAllSubsets}) {
    options.method = method;
    const SearchResult result = RunSearch(problem.factor, problem.design, options);
    EXPECT_TRUE(Contains(result.final_terms, "x6")) << ToString(method);
    EXPECT_FALSE(Contains(result.final_terms, "x1")) << ToString(method);
    for (const auto& step : result.steps) {
      EXPECT_EQ(FindCandidate(step, "x1"), nullptr) << "never term scored, " << ToString(method);
      const CandidateScore* kept = FindCandidate(step, "x6");
      if (kept) {
        EXPECT_FALSE(kept->eligible);
      }
    }
    ASSERT_FALSE(result.excluded.empty());
    EXPECT_EQ(result.excluded.front().term, "x1");
  }
}

TEST(KeepAndNever, UnknownOrConflictingNamesAreRefusedWithTheirKeyPath) {
  const DenseProblem problem = testing::MakeRandomProblem({});
  SearchOptions options;
  options.keep = {"x1", "nope"};
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL();
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "keep[1]");
    EXPECT_NE(std::string(error.what()).find("nope"), std::string::npos);
  }
  options.keep = {"x1"};
  options.never = {"x2", "x1"};
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL();
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "never[1]");
  }
  options.never = {};
  options.keep = {"x1", "x2"};
  options.max_terms = 1;
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL();
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "max_terms");
  }
}

TEST(MaxTerms, ForwardStopsAndBackwardIsForcedDown) {
  testing::RandomProblemOptions data;
  data.seed = 12;
  data.n = 500;
  data.numeric_terms = 8;
  data.true_terms = 6;
  const DenseProblem problem = testing::MakeRandomProblem(data);
  SearchOptions options;
  options.criterion = Criterion::kAic;
  options.max_terms = 2;
  options.method = Method::kForward;
  const SearchResult forward = RunSearch(problem.factor, problem.design, options);
  EXPECT_EQ(forward.final_terms.size(), 2u);
  EXPECT_EQ(forward.outcome, SearchOutcome::kStoppedMaxTerms);
  EXPECT_NE(forward.stop_rule.find("max_terms"), std::string::npos);
  const CandidateScore& blocked = forward.steps.back().candidates.front();
  EXPECT_FALSE(blocked.eligible);
  EXPECT_NE(blocked.reason.find("max_terms"), std::string::npos) << blocked.reason;

  options.method = Method::kBackward;
  const SearchResult backward = RunSearch(problem.factor, problem.design, options);
  EXPECT_LE(backward.final_terms.size(), 2u);
  bool forced = false;
  for (const auto& step : backward.steps) forced = forced || step.rule.find("forced") != std::string::npos;
  EXPECT_TRUE(forced);
}

TEST(Ties, EqualScoresBreakByPlanOrderAndAreRecorded) {
  // Rows (a, b, y) and (b, a, y) in pairs: x1 and x2 fit y equally well alone (invented data).
  testing::RandomProblemOptions data;
  data.seed = 5;
  data.n = 50;
  data.numeric_terms = 2;
  data.true_terms = 2;
  data.effect = 1;
  const DenseProblem half = testing::MakeRandomProblem(data);
  const arma::mat ab = arma::normalise(half.x.cols(1, 2).eval().each_row() - arma::mean(half.x.cols(1, 2)), 2, 0);
  const arma::vec y_half = ab.col(0) + ab.col(1) + 0.1 * (half.y - arma::mean(half.y)) / std::sqrt(50.0);
  arma::mat predictors = arma::join_cols(ab, arma::fliplr(ab));
  const arma::vec y = arma::join_cols(y_half, y_half);
  const DenseProblem problem = testing::MakeDenseProblem(predictors, y, {{"x1"}, {"x2"}});
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kBic;
  const SearchResult result = RunSearch(problem.factor, problem.design, options);
  ASSERT_GE(result.steps.size(), 2u);
  ASSERT_EQ(result.steps[1].action, StepAction::kAdd);
  EXPECT_EQ(result.steps[1].term, "x1");
  EXPECT_EQ(result.steps[1].ties, (std::vector<std::string>{"x2"}));
  EXPECT_NE(result.FullReport().find("tie"), std::string::npos);
}

TEST(Aliased, AnAliasedTermIsNotEligibleAndSaysWhy) {
  testing::RandomProblemOptions data;
  data.seed = 3;
  data.n = 100;
  data.numeric_terms = 2;
  data.true_terms = 2;
  data.effect = 1;
  const DenseProblem base = testing::MakeRandomProblem(data);
  arma::mat predictors = base.x.cols(1, 2);
  predictors.insert_cols(2, predictors.col(0) + 2 * predictors.col(1));  // x3 = x1 + 2 x2
  const DenseProblem problem = testing::MakeDenseProblem(predictors, base.y, {{"x1"}, {"x2"}, {"x3"}});
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kAic;
  const SearchResult forward = RunSearch(problem.factor, problem.design, options);
  ASSERT_EQ(forward.final_terms.size(), 2u);
  const CandidateScore* aliased = FindCandidate(forward.steps.back(), forward.steps.back().candidates.front().term);
  ASSERT_NE(aliased, nullptr);
  EXPECT_FALSE(aliased->eligible);
  EXPECT_NE(aliased->reason.find("aliased"), std::string::npos) << aliased->reason;
  EXPECT_NE(aliased->reason.find("alias_tolerance 1e-10"), std::string::npos) << aliased->reason;
  EXPECT_FALSE(aliased->rss.has_value());

  options.method = Method::kBackward;
  const SearchResult backward = RunSearch(problem.factor, problem.design, options);
  ASSERT_EQ(backward.excluded.size(), 1u);
  EXPECT_EQ(backward.excluded[0].term, "x3");
  EXPECT_NE(backward.excluded[0].reason.find("'x3'"), std::string::npos) << backward.excluded[0].reason;
}

TEST(NoEligibleTerms, EveryTermKeptOrNeverEndsWithAClearOutcome) {
  const DenseProblem problem = testing::MakeRandomProblem({.seed = 4, .n = 50, .numeric_terms = 3});
  SearchOptions options;
  options.keep = {"x1"};
  options.never = {"x2", "x3"};
  for (Method method : {Method::kForward, Method::kBackward, Method::kStepwise, Method::kAllSubsets}) {
    options.method = method;
    const SearchResult result = RunSearch(problem.factor, problem.design, options);
    EXPECT_EQ(result.outcome, SearchOutcome::kNoEligibleTerms) << ToString(method);
    EXPECT_NE(result.stop_rule.find("no candidate terms"), std::string::npos) << result.stop_rule;
    EXPECT_EQ(result.final_terms, (std::vector<std::string>{"x1"}));
  }
}

TEST(NoEligibleTerms, AProductWhosePartIsNeverCannotEnter) {
  const DenseProblem problem = InteractionProblem();
  SearchOptions options;
  options.method = Method::kForward;
  options.never = {"x1", "x2"};
  const SearchResult result = RunSearch(problem.factor, problem.design, options);
  EXPECT_EQ(result.outcome, SearchOutcome::kNoEligibleTerms);
  EXPECT_NE(result.stop_rule.find("hierarchy"), std::string::npos) << result.stop_rule;
}

TEST(TooFewRows, CandidatesWithNAtMostKAreNotEligibleAndSaySo) {
  // 6 rows, 8 one-column terms (invented data). Forward by partial-f with a lax entry_p adds
  // terms until k = 5; every further candidate would leave no residual degree of freedom.
  const DenseProblem problem =
      testing::MakeRandomProblem({.seed = 9, .n = 6, .numeric_terms = 8, .true_terms = 8, .effect = 3});
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kPartialF;
  options.entry_p = 0.99;
  const SearchResult forward = RunSearch(problem.factor, problem.design, options);
  EXPECT_EQ(forward.outcome, SearchOutcome::kNoEligibleTerms) << forward.FullReport();
  EXPECT_EQ(forward.final_terms.size(), 4u);  // k = 5 < n = 6
  EXPECT_NE(forward.stop_rule.find("entry p-value undefined"), std::string::npos) << forward.stop_rule;
  ASSERT_FALSE(forward.steps.back().candidates.empty());
  for (const auto& candidate : forward.steps.back().candidates) {
    EXPECT_FALSE(candidate.eligible);
    EXPECT_NE(candidate.reason.find("n <= k"), std::string::npos) << candidate.reason;
  }

  // BIC: the same candidates are undefined ("n <= k" in the criterion's words).
  options.criterion = Criterion::kBic;
  const SearchResult bic = RunSearch(problem.factor, problem.design, options);
  for (const auto& step : bic.steps) {
    for (const auto& candidate : step.candidates) {
      if (bic.steps.size() > 1 && step.index > 4) {
        EXPECT_FALSE(candidate.eligible) << candidate.term;
      }
    }
  }
  EXPECT_LE(bic.final_terms.size(), 4u);

  // Backward from a saturated model (5 terms, k = n = 6): the start is undefined, so the
  // first removal is taken and its rule says why.
  const DenseProblem saturated =
      testing::MakeRandomProblem({.seed = 10, .n = 6, .numeric_terms = 5, .true_terms = 5, .effect = 3});
  options.method = Method::kBackward;
  const SearchResult backward = RunSearch(saturated.factor, saturated.design, options);
  ASSERT_GE(backward.steps.size(), 3u);
  EXPECT_FALSE(backward.steps[0].criterion_value.has_value());
  EXPECT_EQ(backward.steps[1].action, StepAction::kRemove);
  EXPECT_NE(backward.steps[1].rule.find("n <= k"), std::string::npos) << backward.steps[1].rule;
}

}  // namespace
}  // namespace stepledger

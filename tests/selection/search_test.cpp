// Routes of forward, backward and stepwise: the Hald cement data (textbook routes), and an
// independent refit oracle on invented data sets.

#include "stepledger/selection/search.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <stdexcept>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "support/refit_oracle.h"
#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

using testing::DenseProblem;

std::vector<std::string> Moves(const SearchResult& result) {
  std::vector<std::string> moves;
  for (const auto& step : result.steps) {
    if (step.action == StepAction::kAdd) moves.push_back("+" + step.term);
    if (step.action == StepAction::kRemove) moves.push_back("-" + step.term);
  }
  return moves;
}

std::vector<std::string> SortedTerms(std::vector<std::string> terms) {
  std::sort(terms.begin(), terms.end());
  return terms;
}

class HaldRoutes : public ::testing::Test {
 protected:
  void SetUp() override {
    hald_ = testing::LoadHald();
  }
  DenseProblem hald_;
};

// Source: Hald (1952) as reproduced in Draper and Smith, Applied Regression Analysis; the
// routes are textbook results recalled from memory and confirmed by refitting every candidate
// model (the refit oracle below, and tests/reference/NOTES.md's exact RSS table).
TEST_F(HaldRoutes, StepwisePartialFAddsX4X1X2ThenRemovesX4) {
  SearchOptions options;
  options.method = Method::kStepwise;
  options.criterion = Criterion::kPartialF;
  options.entry_p = 0.10;
  options.exit_p = 0.10;
  const SearchResult result = RunSearch(hald_.factor, hald_.design, options);
  EXPECT_EQ(Moves(result), (std::vector<std::string>{"+x4", "+x1", "+x2", "-x4"}));
  EXPECT_EQ(SortedTerms(result.final_terms), (std::vector<std::string>{"x1", "x2"}));
  EXPECT_EQ(result.outcome, SearchOutcome::kStoppedNoImprovement);
  // RSS of {x1, x2}: 57.90448318 (exact rational refit, reference README table).
  EXPECT_NEAR(result.final_rss, 57.90448318, 1e-7);
  // The removal of x4 is decided by its exit p-value, about 0.205 (from memory; the F of
  // x4 in {x1, x2, x4} is (57.904483 - 47.972729) / (47.972729 / 9) = 1.863).
  const auto removal = std::find_if(result.steps.begin(), result.steps.end(),
                                    [](const RouteStep& step) { return step.action == StepAction::kRemove; });
  ASSERT_NE(removal, result.steps.end());
  ASSERT_TRUE(removal->p.has_value());
  EXPECT_NEAR(*removal->f, (57.90448318 - 47.97272940) / (47.97272940 / 9), 1e-6);
  EXPECT_NEAR(*removal->p, 0.205, 0.001);
  EXPECT_NE(removal->rule.find("exit_p"), std::string::npos) << removal->rule;
}

TEST_F(HaldRoutes, BackwardPartialFRemovesX3ThenX4) {
  SearchOptions options;
  options.method = Method::kBackward;
  options.criterion = Criterion::kPartialF;
  options.exit_p = 0.10;
  const SearchResult result = RunSearch(hald_.factor, hald_.design, options);
  EXPECT_EQ(Moves(result), (std::vector<std::string>{"-x3", "-x4"}));
  EXPECT_EQ(SortedTerms(result.final_terms), (std::vector<std::string>{"x1", "x2"}));
}

TEST_F(HaldRoutes, ForwardPartialFStopsAtX4X1BecauseX2EntersAtP052) {
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kPartialF;
  options.entry_p = 0.05;
  const SearchResult result = RunSearch(hald_.factor, hald_.design, options);
  EXPECT_EQ(Moves(result), (std::vector<std::string>{"+x4", "+x1"}));
  EXPECT_EQ(result.outcome, SearchOutcome::kStoppedNoImprovement);
  // The stop step's candidate table holds x2's entry p-value, about 0.052 (from memory).
  const RouteStep& stop = result.steps.back();
  ASSERT_EQ(stop.action, StepAction::kStop);
  const auto x2 = std::find_if(stop.candidates.begin(), stop.candidates.end(),
                               [](const CandidateScore& c) { return c.term == "x2"; });
  ASSERT_NE(x2, stop.candidates.end());
  ASSERT_TRUE(x2->p.has_value());
  EXPECT_NEAR(*x2->p, 0.052, 0.001);
  EXPECT_NEAR(*x2->rss, 47.97272940, 1e-7);  // RSS of {x1, x2, x4}, reference README table
}

TEST_F(HaldRoutes, StartAndStopStepsFrameTheRoute) {
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kBic;
  const SearchResult result = RunSearch(hald_.factor, hald_.design, options);
  ASSERT_GE(result.steps.size(), 2u);
  EXPECT_EQ(result.steps.front().action, StepAction::kStart);
  EXPECT_EQ(result.steps.front().index, 0u);
  EXPECT_EQ(result.steps.back().action, StepAction::kStop);
  for (std::size_t i = 0; i < result.steps.size(); ++i) EXPECT_EQ(result.steps[i].index, i);
  // Intercept-only RSS is the total sum of squares, 2715.763077 (reference README).
  EXPECT_NEAR(*result.steps.front().rss, 2715.763077, 1e-6);
  EXPECT_NEAR(result.tss, 2715.763077, 1e-6);
  // Every add step lists the candidates it chose among, and they were all scored.
  EXPECT_EQ(result.steps[1].candidates.size(), 4u);
  const std::string report = result.FullReport();
  EXPECT_NE(report.find("x4"), std::string::npos);
  EXPECT_NE(report.find("stop"), std::string::npos);
}

TEST_F(HaldRoutes, NoneFitsEveryTerm) {
  SearchOptions options;
  options.method = Method::kNone;
  const SearchResult result = RunSearch(hald_.factor, hald_.design, options);
  EXPECT_EQ(result.final_terms, (std::vector<std::string>{"x1", "x2", "x3", "x4"}));
  EXPECT_EQ(result.outcome, SearchOutcome::kCompleted);
  EXPECT_NEAR(result.final_rss, 47.86363935, 1e-7);  // reference README table, full model
}

// --- the refit oracle over invented data sets ------------------------------------------

struct RouteCase {
  Method method;
  Criterion criterion;
};

std::string CaseName(const ::testing::TestParamInfo<RouteCase>& info) {
  std::string name = std::string(ToString(info.param.method)) + "_" + ToString(info.param.criterion);
  std::replace(name.begin(), name.end(), '-', '_');
  return name;
}

/// 50 data sets: n from 30 to 2000, up to 25 terms including a categorical one, neighbouring
/// predictors correlated from 0 to 0.9. Invented data (their true model does not matter here).
std::vector<testing::RandomProblemOptions> OracleDataSets() {
  const std::size_t sizes[] = {30, 45, 80, 150, 400, 1000, 2000};
  std::vector<testing::RandomProblemOptions> sets;
  for (std::uint64_t seed = 1; seed <= 50; ++seed) {
    testing::RandomProblemOptions options;
    options.seed = 1000 + seed;
    options.n = sizes[seed % 7];
    const std::size_t limit = options.n <= 45 ? 10 : 25;
    options.numeric_terms = 3 + (seed * 7) % (limit - 2);
    options.categorical_levels = seed % 3 == 0 ? 0 : 3 + seed % 3;
    if (options.numeric_terms + options.categorical_levels > 25) options.numeric_terms = 25 - options.categorical_levels;
    options.correlation = 0.1 * static_cast<double>(seed % 10);
    options.true_terms = 1 + seed % 5;
    options.effect = options.n < 100 ? 0.6 : 0.12;
    sets.push_back(options);
  }
  return sets;
}

class OracleRoutes : public ::testing::TestWithParam<RouteCase> {};

TEST_P(OracleRoutes, KernelSearchTakesTheRefitRoute) {
  std::size_t moves_seen = 0;
  for (const auto& data : OracleDataSets()) {
    const DenseProblem problem = testing::MakeRandomProblem(data);
    SearchOptions options;
    options.method = GetParam().method;
    options.criterion = GetParam().criterion;
    options.entry_p = 0.05;
    options.exit_p = 0.10;
    const SearchResult result = RunSearch(problem.factor, problem.design, options);
    const testing::OracleRoute expected = testing::OracleSearch(problem, options);
    testing::ExpectSameRoute(expected, testing::RouteOf(result, problem.design),
                             "seed " + std::to_string(data.seed) + ", n " + std::to_string(data.n) +
                                 ", terms " + std::to_string(problem.design.terms.size()));
    moves_seen += expected.moves.size();
  }
  EXPECT_GT(moves_seen, 50u) << "the data sets should make the searches move";
}

INSTANTIATE_TEST_SUITE_P(
    MethodsByCriteria, OracleRoutes,
    ::testing::Values(RouteCase{Method::kForward, Criterion::kAdjR2}, RouteCase{Method::kForward, Criterion::kAic},
                      RouteCase{Method::kForward, Criterion::kAicc}, RouteCase{Method::kForward, Criterion::kBic},
                      RouteCase{Method::kForward, Criterion::kCp}, RouteCase{Method::kForward, Criterion::kPartialF},
                      RouteCase{Method::kBackward, Criterion::kAdjR2}, RouteCase{Method::kBackward, Criterion::kAic},
                      RouteCase{Method::kBackward, Criterion::kAicc}, RouteCase{Method::kBackward, Criterion::kBic},
                      RouteCase{Method::kBackward, Criterion::kCp}, RouteCase{Method::kBackward, Criterion::kPartialF},
                      RouteCase{Method::kStepwise, Criterion::kAdjR2}, RouteCase{Method::kStepwise, Criterion::kAic},
                      RouteCase{Method::kStepwise, Criterion::kAicc}, RouteCase{Method::kStepwise, Criterion::kBic},
                      RouteCase{Method::kStepwise, Criterion::kCp}, RouteCase{Method::kStepwise, Criterion::kPartialF}),
    CaseName);

// --- options that are refused -----------------------------------------------------------

TEST(SearchOptionsValidation, StepwisePartialFWithEntryAboveExitIsRefusedNamingBothKeys) {
  const DenseProblem problem = testing::MakeRandomProblem({});
  SearchOptions options;
  options.method = Method::kStepwise;
  options.criterion = Criterion::kPartialF;
  options.entry_p = 0.2;
  options.exit_p = 0.1;
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "entry_p");
    EXPECT_NE(std::string(error.what()).find("exit_p"), std::string::npos) << error.what();
  }
  // The same thresholds are fine for backward (no cycle is possible there).
  options.method = Method::kBackward;
  EXPECT_NO_THROW(RunSearch(problem.factor, problem.design, options));
}

TEST(SearchOptionsValidation, ProbabilitiesOutsideZeroOneNameTheirKey) {
  const DenseProblem problem = testing::MakeRandomProblem({});
  SearchOptions options;
  options.exit_p = 1.5;
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "exit_p");
  }
  options.exit_p = 0.1;
  options.entry_p = 0;
  EXPECT_THROW(RunSearch(problem.factor, problem.design, options), PlanError);
}

// A factor folded from another design is the caller's bug: it leaves as std::logic_error
// (exit 3 through RunCli), never as InputError (exit 2), and says so (STYLE.md, habit 4).
TEST(SearchCallerBugs, FactorOfAnotherDesignIsALogicErrorNotInputError) {
  const DenseProblem small = testing::MakeRandomProblem({.numeric_terms = 3});
  const DenseProblem large = testing::MakeRandomProblem({.numeric_terms = 5});
  SearchOptions options;
  options.method = Method::kForward;
  try {
    RunSearch(small.factor, large.design, options);
    FAIL() << "expected std::logic_error";
  } catch (const InputError& error) {
    FAIL() << "a caller's bug left as InputError: " << error.what();
  } catch (const std::logic_error& error) {
    const std::string message = error.what();
    EXPECT_NE(message.find("bug"), std::string::npos) << message;
    EXPECT_NE(message.find("the factor has 4 design columns but the design has 6"), std::string::npos)
        << message;
  }
}

TEST(SearchResultReports, NotRunSentinel) {
  SearchResult result;
  EXPECT_EQ(result.outcome, SearchOutcome::kNotRun);
  EXPECT_FALSE(result.IsModelUsable());
  EXPECT_STREQ(ToString(SearchOutcome::kCycleDetected), "cycle-detected");
}

}  // namespace
}  // namespace stepledger

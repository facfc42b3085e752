// Criterion cv (selection/criterion.h): the routes of forward, backward and stepwise equal a
// test-only oracle that refits every candidate model on every fold's training rows from the
// rows themselves (support/refit_oracle.h with the brute-force k-fold error of
// support/dense_design.h), and every scored candidate carries its per-fold errors.
//
// Source of the expected values: the oracle, an independent implementation (plain weighted
// least squares per training set, LAPACK through Armadillo), on invented data whose true model
// the generator states (support/selection_fixtures.h); no outside values are involved.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <stdexcept>
#include <string>
#include <vector>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/errors.h"
#include "stepledger/selection/search.h"
#include "support/dense_design.h"
#include "support/refit_oracle.h"
#include "support/selection_fixtures.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

using testing::DenseProblem;

/// A problem with its fold assignment and weights, the search factor and the fold factors
/// folded from the same (weighted) rows.
struct CvProblem {
  DenseProblem problem;
  arma::vec w;  // empty: unweighted
  std::size_t folds = 0;
  std::vector<std::size_t> fold_of_row;
  std::unique_ptr<CrossValidation> cv;
};

CvProblem MakeCvProblem(const testing::RandomProblemOptions& options, bool weighted, std::size_t folds,
                        std::uint64_t fold_seed) {
  CvProblem made;
  made.problem = testing::MakeRandomProblem(options);
  const std::size_t n = made.problem.x.n_rows;
  if (weighted) {
    testing::TestRandom random(options.seed + 500);
    made.w.set_size(n);
    for (std::size_t i = 0; i < n; ++i) made.w(i) = 0.2 + 3 * random.Uniform(0, 1);
  }
  const auto scales = made.problem.design.scales();
  made.problem.factor = testing::BuildFactor(made.problem.x, made.problem.y, made.w, 64, scales);
  made.folds = folds;
  made.fold_of_row = testing::FoldsOfRows(n, fold_seed, folds);
  made.cv = std::make_unique<CrossValidation>(
      testing::BuildFoldFactors(made.problem.x, made.problem.y, made.w, made.fold_of_row, folds, scales));
  return made;
}

std::vector<std::size_t> ColumnsOfTerms(const Design& design, const std::vector<std::size_t>& terms) {
  std::vector<std::size_t> columns;
  if (design.intercept) columns.push_back(0);
  for (std::size_t term : terms) {
    for (std::size_t column : design.TermColumns(term)) columns.push_back(column);
  }
  return columns;
}

/// The oracle's cv: sqrt(sum of the refitted per-fold SSE / sum of weights).
std::optional<double> RefitCv(const CvProblem& made, const std::vector<std::size_t>& terms) {
  const auto sse = testing::BruteForceFoldSse(made.problem.x, made.problem.y, made.w, made.fold_of_row,
                                              made.folds, ColumnsOfTerms(made.problem.design, terms));
  if (!sse) return std::nullopt;
  const double weight = made.w.is_empty() ? static_cast<double>(made.problem.x.n_rows) : arma::accu(made.w);
  return std::sqrt(std::accumulate(sse->begin(), sse->end(), 0.0) / weight);
}

SearchOptions CvSearch(Method method) {
  SearchOptions search;
  search.method = method;
  search.criterion = Criterion::kCv;
  return search;
}

/// RunSearch with the problem's fold factors (and the plan's folds set to their number).
SearchResult RunCv(const CvProblem& made, SearchOptions options) {
  options.folds = static_cast<int>(made.folds);
  SearchRunOptions run;
  run.cross_validation = made.cv.get();
  return RunSearch(made.problem.factor, made.problem.design, options, nullptr, run);
}

TEST(CvRoutes, ForwardBackwardAndStepwiseEqualTheRefitOracle) {
  const Method methods[] = {Method::kForward, Method::kBackward, Method::kStepwise};
  int cases = 0;
  std::size_t moves = 0, removals = 0;
  for (std::uint64_t seed = 1; seed <= 24; ++seed) {
    testing::RandomProblemOptions options;
    options.seed = 4000 + seed;
    options.n = 120 + 20 * (seed % 5);
    options.numeric_terms = 5 + seed % 3;
    options.categorical_levels = seed % 2 == 0 ? 4 : 0;  // half the data sets carry a categorical
    options.true_terms = 2 + seed % 3;
    options.effect = 0.15 + 0.05 * static_cast<double>(seed % 4);  // weak effects: routes vary
    options.correlation = 0.3 + 0.1 * static_cast<double>(seed % 5);
    const bool weighted = seed % 3 == 0;
    const std::size_t folds = seed % 4 == 0 ? 5 : 10;
    const CvProblem made = MakeCvProblem(options, weighted, folds, 100 + seed);
    for (Method method : methods) {
      SearchOptions search = CvSearch(method);
      if (seed % 6 == 5) search.max_terms = 3;
      const std::string label = "data set " + std::to_string(seed) + " (" + ToString(method) +
                                (weighted ? ", weighted" : "") + ", " + std::to_string(folds) + " folds)";
      const auto expected = testing::OracleSearch(
          made.problem, search, [&](const std::vector<std::size_t>& terms) { return RefitCv(made, terms); });
      const SearchResult result = RunCv(made, search);
      testing::ExpectSameRoute(expected, testing::RouteOf(result, made.problem.design), label);
      ASSERT_TRUE(result.final_criterion_value.has_value()) << label;
      const auto refit = RefitCv(made, result.final_term_indices);
      ASSERT_TRUE(refit.has_value()) << label;
      EXPECT_NEAR(*result.final_criterion_value, *refit, 1e-9 * *refit) << label;
      ++cases;
      moves += expected.moves.size();
      removals += static_cast<std::size_t>(std::count_if(expected.moves.begin(), expected.moves.end(),
                                                         [](const auto& move) { return move.action == MoveAction::kRemove; }));
    }
  }
  EXPECT_EQ(cases, 72);
  // The routes are not trivial: many moves, removals among them (backward, stepwise re-tests).
  EXPECT_GT(moves, 150u);
  EXPECT_GT(removals, 50u);
}

TEST(CvRoutes, EveryCandidateCarriesItsFoldErrors) {
  const CvProblem made = MakeCvProblem({.seed = 77, .categorical_levels = 3}, true, 7, 5);
  SearchOptions search = CvSearch(Method::kStepwise);
  const SearchResult result = RunCv(made, search);
  const double weight = arma::accu(made.w);
  std::size_t checked = 0;
  for (const auto& step : result.steps) {
    for (const auto& candidate : step.candidates) {
      ASSERT_TRUE(candidate.score.has_value()) << candidate.term;
      ASSERT_EQ(candidate.fold_sse.size(), 7u) << candidate.term;
      const double total = std::accumulate(candidate.fold_sse.begin(), candidate.fold_sse.end(), 0.0);
      EXPECT_NEAR(std::sqrt(total / weight), *candidate.score, 1e-12 * *candidate.score) << candidate.term;
      ++checked;
    }
  }
  EXPECT_GT(checked, 10u);
  // The first step's candidates, fold by fold, against the refit (1e-9 relative).
  const auto& first = result.steps.at(1).candidates;
  for (const auto& candidate : first) {
    ASSERT_EQ(candidate.action, MoveAction::kAdd);
    const auto sse = testing::BruteForceFoldSse(made.problem.x, made.problem.y, made.w, made.fold_of_row, 7,
                                                ColumnsOfTerms(made.problem.design, {candidate.term_index}));
    ASSERT_TRUE(sse.has_value());
    for (std::size_t f = 0; f < 7; ++f) {
      EXPECT_NEAR(candidate.fold_sse[f], (*sse)[f], 1e-9 * (*sse)[f]) << candidate.term << " fold " << f;
    }
  }
  // The value name and the other criteria's candidates (no fold errors).
  search.criterion = Criterion::kBic;
  for (const auto& step : RunCv(made, search).steps) {
    for (const auto& candidate : step.candidates) EXPECT_TRUE(candidate.fold_sse.empty());
  }
}

TEST(CvRoutes, AColumnAliasedInATrainingFoldIsNotEligibleAndSaysWhy) {
  CvProblem made = MakeCvProblem({.seed = 91, .numeric_terms = 4}, false, 5, 3);
  // x4 := nonzero only in fold 1's rows, so that without fold 1 it is a zero column.
  for (arma::uword i = 0; i < made.problem.x.n_rows; ++i) {
    made.problem.x(i, 4) = made.fold_of_row[i] == 1 ? made.problem.y(i) * 0.5 + static_cast<double>(i % 3) : 0.0;
  }
  const auto scales = made.problem.design.scales();
  made.problem.factor = testing::BuildFactor(made.problem.x, made.problem.y, made.w, 64, scales);
  made.cv = std::make_unique<CrossValidation>(testing::BuildFoldFactors(
      made.problem.x, made.problem.y, made.w, made.fold_of_row, 5, scales));
  const SearchResult result = RunCv(made, CvSearch(Method::kForward));
  const auto& first = result.steps.at(1).candidates;
  const auto x4 = std::find_if(first.begin(), first.end(), [](const auto& c) { return c.term == "x4"; });
  ASSERT_NE(x4, first.end());
  EXPECT_FALSE(x4->eligible);
  EXPECT_FALSE(x4->score.has_value());
  EXPECT_TRUE(x4->fold_sse.empty());
  EXPECT_NE(x4->reason.find("column 'x4'"), std::string::npos) << x4->reason;
  EXPECT_NE(x4->reason.find("fold 1"), std::string::npos) << x4->reason;
  for (const auto& term : result.final_terms) EXPECT_NE(term, "x4");
}

TEST(CvRoutes, AllSubsetsChoosesTheBestCvAmongTheModelsKeptByRss) {
  const CvProblem made = MakeCvProblem({.seed = 12, .numeric_terms = 6, .categorical_levels = 3}, true, 10, 9);
  SearchOptions search = CvSearch(Method::kAllSubsets);
  search.best_per_size = 2;
  const SearchResult result = RunCv(made, search);
  ASSERT_FALSE(result.subsets.empty());
  std::optional<double> best;
  std::vector<std::string> best_terms;
  for (const auto& subset : result.subsets) {
    const auto refit = RefitCv(made, subset.term_indices);
    ASSERT_TRUE(refit.has_value());
    ASSERT_TRUE(subset.score.has_value());
    EXPECT_NEAR(*subset.score, *refit, 1e-9 * *refit);
    EXPECT_EQ(subset.fold_sse.size(), 10u);
    if (!best || *refit < *best) { best = refit; best_terms = subset.terms; }
  }
  std::vector<std::string> final_terms = result.final_terms;
  std::sort(final_terms.begin(), final_terms.end());
  std::sort(best_terms.begin(), best_terms.end());
  EXPECT_EQ(final_terms, best_terms);
  EXPECT_NE(result.stop_rule.find("the best by RSS of each size"), std::string::npos) << result.stop_rule;
}

TEST(CvRoutes, FoldFactorsOfAnotherPassAreACallerBug) {
  const CvProblem made = MakeCvProblem({.seed = 5}, false, 5, 1);
  SearchOptions search = CvSearch(Method::kForward);
  search.folds = 10;  // the pass built 5
  SearchRunOptions run;
  run.cross_validation = made.cv.get();
  EXPECT_THROW(RunSearch(made.problem.factor, made.problem.design, search, nullptr, run), std::logic_error);
}

TEST(CvRoutes, CvWithoutFoldFactorsIsRefusedNamingTheCriterion) {
  const DenseProblem problem = testing::MakeRandomProblem({});
  SearchOptions options;
  options.criterion = Criterion::kCv;
  EXPECT_NO_THROW(ValidateSearchSettings(options));  // the plan itself is fine
  try {
    RunSearch(problem.factor, problem.design, options);
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "criterion");
    EXPECT_NE(std::string(error.what()).find("per-fold factors"), std::string::npos) << error.what();
  }
}

}  // namespace
}  // namespace stepledger

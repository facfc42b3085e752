// The fitting kernel against direct least-squares refits on the rows (LAPACK's QR through
// arma::solve with solve_opts::no_approx): RSS of random subsets, every add and remove score,
// Givens moves in any order, aliasing. Expected values: "direct refit" (common practice: the
// RSS of a least-squares fit does not depend on how it is computed).

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>

#include "stepledger/engine/criteria.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/kernel.h"
#include "support/dense_design.h"
#include "support/nist.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

struct Problem {
  arma::mat x;  // column 0 = intercept
  arma::vec y, w;
  Factor factor;
};

Problem RandomProblem(std::size_t n, std::size_t m, unsigned seed, bool weighted) {
  arma::arma_rng::set_seed(seed);
  Problem problem;
  problem.x = arma::randn(n, m);
  problem.x.col(0).ones();
  for (std::size_t j = 1; j < m; ++j) problem.x.col(j) *= std::pow(4.0, static_cast<double>(j % 5) - 2);
  problem.y = problem.x * arma::randn(m) + 0.5 * arma::randn(n);
  problem.w = weighted ? arma::vec(0.25 + arma::randu(n)) : arma::vec(n, arma::fill::ones);
  problem.factor = testing::BuildFactor(problem.x, problem.y, problem.w, 37);
  return problem;
}

// Direct weighted least squares on the rows of the chosen columns.
double DirectRss(const Problem& problem, const std::vector<std::size_t>& columns) {
  const arma::vec root_w = arma::sqrt(problem.w);
  const arma::vec y = problem.y % root_w;
  if (columns.empty()) return arma::dot(y, y);
  arma::mat x(problem.x.n_rows, columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) x.col(j) = problem.x.col(columns[j]) % root_w;
  arma::vec beta;
  const bool solved = arma::solve(beta, x, y, arma::solve_opts::no_approx);
  EXPECT_TRUE(solved);
  const arma::vec residual = y - x * beta;
  return arma::dot(residual, residual);
}

double Relative(double a, double b) { return std::abs(a - b) / std::max(std::abs(b), 1e-300); }

std::vector<std::size_t> RandomSubset(std::size_t m, std::mt19937& generator) {
  std::vector<std::size_t> columns;
  for (std::size_t j = 0; j < m; ++j) {
    if (generator() % 2) columns.push_back(j);
  }
  std::shuffle(columns.begin(), columns.end(), generator);
  return columns;
}

TEST(Kernel, RssOfRandomSubsetsEqualsDirectRefit) {
  for (bool weighted : {false, true}) {
    const Problem problem = RandomProblem(150, 12, weighted ? 11 : 10, weighted);
    std::mt19937 generator(5);
    for (int trial = 0; trial < 200; ++trial) {
      const std::vector<std::size_t> columns = RandomSubset(12, generator);
      ModelState state(problem.factor);
      ASSERT_TRUE(state.Add(columns));
      EXPECT_LT(Relative(state.Rss(), DirectRss(problem, columns)), 1e-10)
          << "trial " << trial << (weighted ? " weighted" : "");
      EXPECT_EQ(state.model_columns(), columns);
    }
  }
}

TEST(Kernel, EverySingleAndGroupScoreEqualsDirectRefit) {
  const Problem problem = RandomProblem(120, 10, 12, true);
  std::mt19937 generator(6);
  for (int trial = 0; trial < 25; ++trial) {
    const std::vector<std::size_t> model = RandomSubset(10, generator);
    ModelState state(problem.factor);
    ASSERT_TRUE(state.Add(model));
    const double rss_before = state.Rss();
    const auto single = state.ScoreAllSingleAdds();
    std::vector<std::size_t> outside;
    for (std::size_t j = 0; j < 10; ++j) {
      if (state.Contains(j)) {
        EXPECT_FALSE(single[j].has_value());
        continue;
      }
      outside.push_back(j);
      std::vector<std::size_t> with = model;
      with.push_back(j);
      const double direct = DirectRss(problem, with);
      ASSERT_TRUE(single[j].has_value());
      EXPECT_LT(Relative(single[j]->rss, direct), 1e-10) << "add " << j;
      EXPECT_LT(Relative(single[j]->rss_change, rss_before - direct), 1e-8) << "drop of adding " << j;
      const std::size_t one[] = {j};
      EXPECT_EQ(state.ScoreAdd(one).rss, single[j]->rss) << "ScoreAdd and ScoreAllSingleAdds agree exactly";
      EXPECT_EQ(state.ScoreAdd(one).rss_change, single[j]->rss_change);
    }
    if (outside.size() >= 2) {
      const std::vector<std::size_t> group(outside.begin(), outside.begin() + 2 + trial % (outside.size() - 1));
      std::vector<std::size_t> with = model;
      with.insert(with.end(), group.begin(), group.end());
      const GroupScore score = state.ScoreAdd(group);
      EXPECT_FALSE(score.aliased);
      EXPECT_EQ(score.df, group.size());
      EXPECT_LT(Relative(score.rss, DirectRss(problem, with)), 1e-10) << "group add";
      EXPECT_LT(Relative(score.rss_change, rss_before - DirectRss(problem, with)), 1e-8) << "group add's drop";
      EXPECT_GT(score.min_relative_norm, 0.0);
      EXPECT_LE(score.min_relative_norm, 1.0);
    }
    for (std::size_t j : model) {
      std::vector<std::size_t> without = model;
      without.erase(std::find(without.begin(), without.end(), j));
      const std::size_t one[] = {j};
      EXPECT_LT(Relative(state.ScoreRemove(one).rss, DirectRss(problem, without)), 1e-10) << "remove " << j;
      EXPECT_LT(Relative(state.ScoreRemove(one).rss_change, DirectRss(problem, without) - rss_before), 1e-8)
          << "rise of removing " << j;
    }
    if (model.size() >= 2) {
      const std::vector<std::size_t> group = {model.back(), model.front()};
      std::vector<std::size_t> without(model.begin() + 1, model.end() - 1);
      EXPECT_LT(Relative(state.ScoreRemove(group).rss, DirectRss(problem, without)), 1e-10) << "group remove";
      EXPECT_LT(Relative(state.ScoreRemove(group).rss_change, DirectRss(problem, without) - rss_before), 1e-8)
          << "group remove's rise";
    }
    EXPECT_EQ(state.Rss(), rss_before) << "scoring leaves the state unchanged";
  }
}

TEST(Kernel, GivensMovesInAnyOrderGiveTheSameRss) {
  const Problem problem = RandomProblem(100, 9, 13, false);
  const std::vector<std::size_t> target = {0, 2, 3, 5, 8};
  const double direct = DirectRss(problem, target);
  std::mt19937 generator(8);
  for (int trial = 0; trial < 30; ++trial) {
    ModelState state(problem.factor);
    // Wander: add and remove random columns, then settle on the target set in a random order.
    for (int step = 0; step < 15; ++step) {
      const std::size_t column = generator() % 9;
      const std::size_t one[] = {column};
      if (state.Contains(column)) {
        state.Remove(one);
      } else {
        ASSERT_TRUE(state.Add(one));
      }
    }
    for (std::size_t column = 0; column < 9; ++column) {
      const bool wanted = std::find(target.begin(), target.end(), column) != target.end();
      const std::size_t one[] = {column};
      if (state.Contains(column) && !wanted) state.Remove(one);
      if (!state.Contains(column) && wanted) {
        ASSERT_TRUE(state.Add(one));
      }
    }
    EXPECT_LT(Relative(state.Rss(), direct), 1e-12) << "trial " << trial;
    std::vector<std::size_t> sorted = state.model_columns();
    std::sort(sorted.begin(), sorted.end());
    EXPECT_EQ(sorted, target);
  }
}

TEST(Kernel, SolveMatchesDirectCoefficientsAndInverse) {
  const Problem problem = RandomProblem(80, 6, 14, true);
  ModelState state(problem.factor);
  const std::vector<std::size_t> columns = {0, 4, 1, 5};
  ASSERT_TRUE(state.Add(columns));
  const ModelSolution solution = state.Solve();
  arma::mat x(80, 4);
  for (std::size_t j = 0; j < 4; ++j) x.col(j) = problem.x.col(columns[j]);
  const arma::mat xw = x.each_col() % arma::sqrt(problem.w);
  arma::vec beta;
  ASSERT_TRUE(arma::solve(beta, xw, problem.y % arma::sqrt(problem.w), arma::solve_opts::no_approx));
  EXPECT_LT(arma::abs(solution.beta - beta).max() / arma::abs(beta).max(), 1e-12);
  arma::mat inverse;
  ASSERT_TRUE(arma::inv_sympd(inverse, xw.t() * xw));  // well-conditioned here: fine as a check
  EXPECT_LT(arma::abs(solution.xtwx_inverse - inverse).max() / arma::abs(inverse).max(), 1e-10);
  EXPECT_GT(solution.rcond, 0.0);
  EXPECT_LE(solution.rcond, 1.0);
  EXPECT_LT(Relative(solution.rss, DirectRss(problem, columns)), 1e-10);
}

TEST(Kernel, DuplicatedColumnAndFullDummySetAreAliased) {
  arma::arma_rng::set_seed(15);
  const std::size_t n = 60;
  arma::mat x(n, 7, arma::fill::zeros);
  x.col(0).ones();
  x.col(1) = arma::randn(n) * 1000;
  x.col(2) = x.col(1);  // exact duplicate
  for (std::size_t i = 0; i < n; ++i) x(i, 3 + i % 3) = 1;  // three dummies summing to the intercept
  x.col(6) = arma::randn(n);
  const arma::vec y = arma::randn(n);
  const Factor factor = testing::BuildFactor(x, y);
  ModelState state(factor);
  const std::size_t first[] = {0, 1, 3, 4};
  ASSERT_TRUE(state.Add(first));
  EXPECT_TRUE(state.IsAliased(2)) << "duplicate of column 1: " << state.RelativeResidualNorm(2);
  EXPECT_TRUE(state.IsAliased(5)) << "last dummy: " << state.RelativeResidualNorm(5);
  EXPECT_FALSE(state.IsAliased(6));
  const auto scores = state.ScoreAllSingleAdds();
  EXPECT_FALSE(scores[2].has_value());
  EXPECT_FALSE(scores[5].has_value());
  EXPECT_TRUE(scores[6].has_value());
  // A group with an aliased member is refused whole and names the member.
  const std::size_t group[] = {6, 5};
  const GroupScore score = state.ScoreAdd(group);
  EXPECT_TRUE(score.aliased);
  EXPECT_EQ(score.aliased_columns, std::vector<std::size_t>{5});
  const auto before = state.model_columns();
  EXPECT_FALSE(state.Add(group));
  EXPECT_EQ(state.model_columns(), before) << "a refused Add leaves the state as it was";
  // Within a group: the dummies 3, 4, 5 with the intercept are dependent only together.
  ModelState fresh(factor);
  const std::size_t intercept[] = {0};
  ASSERT_TRUE(fresh.Add(intercept));
  const std::size_t dummies[] = {3, 4, 5};
  const GroupScore dummy_score = fresh.ScoreAdd(dummies);
  EXPECT_TRUE(dummy_score.aliased);
  EXPECT_EQ(dummy_score.aliased_columns, std::vector<std::size_t>{5});
  EXPECT_LT(dummy_score.min_relative_norm, 1e-12);
}

TEST(Kernel, FilipPolynomialColumnsAreNotAliased) {
  const testing::NistDataset data = testing::ReadNistDataset(testing::NistDirectory() / "Filip.dat");
  arma::mat x(data.y.n_elem, 11);
  for (arma::uword i = 0; i < x.n_rows; ++i) {
    long double power = 1;
    for (arma::uword j = 0; j < 11; ++j) {
      x(i, j) = static_cast<double>(power);
      power *= static_cast<long double>(data.predictors(i, 0));
    }
  }
  ModelState state(testing::BuildFactor(x, data.y));
  for (std::size_t j = 0; j < 11; ++j) {
    EXPECT_FALSE(state.IsAliased(j)) << "x^" << j << " (NIST StRD Filip, a full-rank degree-10 design): "
                                     << state.RelativeResidualNorm(j);
    const std::size_t one[] = {j};
    ASSERT_TRUE(state.Add(one));
  }
  EXPECT_GT(state.Solve().rcond, 0.0);
}

TEST(Kernel, ProgrammerErrorsAndBadOptions) {
  const Problem problem = RandomProblem(30, 4, 16, false);
  ModelState state(problem.factor);
  const std::size_t out_of_range[] = {4};
  EXPECT_THROW(state.Add(out_of_range), std::logic_error);
  const std::size_t zero[] = {0};
  ASSERT_TRUE(state.Add(zero));
  EXPECT_THROW(state.Add(zero), std::logic_error);
  const std::size_t one[] = {1};
  EXPECT_THROW(state.Remove(one), std::logic_error);
  EXPECT_THROW(state.ScoreRemove(one), std::logic_error);
  const std::size_t repeated[] = {1, 1};
  EXPECT_THROW(state.ScoreAdd(repeated), std::logic_error);
  KernelOptions options;
  options.alias_tolerance = 0;
  try {
    ModelState bad(problem.factor, options);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("alias_tolerance"), std::string::npos) << error.what();
  }
  // The empty model: RSS is the sum of squares about zero.
  ModelState empty(problem.factor);
  EXPECT_LT(Relative(empty.Rss(), arma::dot(problem.y, problem.y)), 1e-12);
  EXPECT_EQ(empty.TotalSumOfSquaresAboutZero(), empty.Rss());
  EXPECT_EQ(empty.Solve().beta.n_elem, 0u);
}

// A term of no effect among many rows: its RSS drop is tiny beside the RSS, so RSS0 - RSS1 keeps
// only the digits the factor's rounding leaves (the rounding changes with the thread count or
// the machine's BLAS kernels, and with it a partial F formed that way). The drop formed from the
// factor keeps its digits: factors folded in different orders (blocks of 1, 7 and 256 rows)
// give the same drop and partial F to 1e-9, and the drop matches the projection of y's
// residual on the column's residual, (x_r' y_r)^2 / (x_r' x_r), computed from a direct solve
// (common practice: the extra sum of squares of one column).
TEST(Kernel, RssChangeKeepsItsDigitsBesideALargeRss) {
  arma::arma_rng::set_seed(20261203);
  const std::size_t n = 20000;
  arma::mat x(n, 3);
  x.col(0).ones();
  x.col(1) = 100 + 10 * arma::randn(n);
  x.col(2) = arma::randn(n);  // no effect on y
  arma::vec y = 5000 + 3 * x.col(1) + 1000 * arma::randn(n);
  // The drop's reference: residuals of y and of column 2 on columns 0 and 1 (LAPACK QR solves).
  // y is then moved almost orthogonal to column 2's residual, so that the drop is about 1e-10 of
  // the RSS: a difference of two RSS would keep about 6 of its digits.
  const arma::mat base = x.cols(0, 1);
  arma::vec b_y, b_x;
  ASSERT_TRUE(arma::solve(b_x, base, arma::vec(x.col(2)), arma::solve_opts::no_approx));
  const arma::vec x_r = x.col(2) - base * b_x;
  ASSERT_TRUE(arma::solve(b_y, base, y, arma::solve_opts::no_approx));
  y -= 0.99 * (arma::dot(x_r, arma::vec(y - base * b_y)) / arma::dot(x_r, x_r)) * x_r;
  ASSERT_TRUE(arma::solve(b_y, base, y, arma::solve_opts::no_approx));
  const arma::vec y_r = y - base * b_y;
  const double reference = std::pow(arma::dot(x_r, y_r), 2) / arma::dot(x_r, x_r);
  ASSERT_LT(reference, 1e-8 * arma::dot(y_r, y_r)) << "the drop must be small beside the RSS for this test";

  std::vector<GroupScore> adds, removes;
  for (std::size_t block_rows : {1, 7, 256}) {
    const Factor factor = testing::BuildFactor(x, y, {}, block_rows);
    ModelState state(factor);
    const std::size_t base_columns[] = {0, 1}, candidate[] = {2};
    ASSERT_TRUE(state.Add(base_columns));
    adds.push_back(state.ScoreAdd(candidate));
    ModelState full(factor);
    const std::size_t all[] = {0, 1, 2};
    ASSERT_TRUE(full.Add(all));
    removes.push_back(full.ScoreRemove(candidate));
    EXPECT_LT(Relative(adds.back().rss_change, reference), 1e-8) << block_rows << " rows a block";
    EXPECT_LT(Relative(removes.back().rss_change, reference), 1e-8) << block_rows << " rows a block";
  }
  for (std::size_t i = 1; i < adds.size(); ++i) {
    EXPECT_LT(Relative(adds[i].rss_change, adds[0].rss_change), 1e-9);
    const PartialF a = ComputePartialFFromChange(adds[i].rss_change, adds[i].rss, 1, n, 3);
    const PartialF b = ComputePartialFFromChange(adds[0].rss_change, adds[0].rss, 1, n, 3);
    EXPECT_LT(Relative(*a.f, *b.f), 1e-9);
  }
}

}  // namespace
}  // namespace stepledger

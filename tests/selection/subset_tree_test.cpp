// All subsets by the regression tree: the same kept subsets as the exhaustive Gray-code
// enumeration (the test oracle: every subset's RSS from one kernel move) and as the earlier
// drop tree, on invented designs (weighted rows, a categorical group, products under
// hierarchy, keep and never), for 1, 2 and 3 threads; the kept RSS refitted from the rows.

#include <gtest/gtest.h>

#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "stepledger/engine/factor.h"
#include "stepledger/selection/search.h"
#include "support/refit_oracle.h"
#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

using testing::DenseProblem;

enum class Algorithm { kTree, kDropTree, kExhaustive };

SearchResult Subsets(const DenseProblem& problem, SearchOptions options, Algorithm algorithm, int threads = 1,
                     std::ostream* progress = nullptr) {
  options.method = Method::kAllSubsets;
  SearchRunOptions run;
  run.exhaustive_subsets = algorithm == Algorithm::kExhaustive;
  run.drop_tree_subsets = algorithm == Algorithm::kDropTree;
  run.threads = threads;
  run.progress = progress;
  return RunSearch(problem.factor, problem.design, options, nullptr, run);
}

std::string Describe(const SubsetRecord& subset) {
  std::string text = std::to_string(subset.size) + "#" + std::to_string(subset.rank_in_size) + ":";
  for (const auto& term : subset.terms) text += " " + term;
  return text;
}

void ExpectSameSubsets(const SearchResult& expected, const SearchResult& actual, const std::string& label) {
  ASSERT_EQ(expected.subsets.size(), actual.subsets.size()) << label;
  for (std::size_t i = 0; i < expected.subsets.size(); ++i) {
    EXPECT_EQ(Describe(expected.subsets[i]), Describe(actual.subsets[i])) << label;
    EXPECT_NEAR(expected.subsets[i].rss, actual.subsets[i].rss, 1e-9 * expected.subsets[i].rss) << label;
  }
  EXPECT_EQ(expected.final_terms, actual.final_terms) << label;
}

/// Bit-for-bit equality: the kept models, their RSS and the choice.
void ExpectIdentical(const SearchResult& a, const SearchResult& b, const std::string& label) {
  ASSERT_EQ(a.subsets.size(), b.subsets.size()) << label;
  for (std::size_t i = 0; i < a.subsets.size(); ++i) {
    EXPECT_EQ(Describe(a.subsets[i]), Describe(b.subsets[i])) << label;
    EXPECT_EQ(a.subsets[i].rss, b.subsets[i].rss) << label;
  }
  EXPECT_EQ(a.final_terms, b.final_terms) << label;
}

/// Invented design: `numeric` AR(1)-correlated predictors, optionally a categorical group of
/// `levels` levels (levels - 1 indicator columns) and two products x0:x1, x1:x2 built on their
/// parts; y from the first few terms; rows weighted (weights in [0.2, 5]) when asked. The
/// factor is folded by the engine's FactorBuilder, as a data pass folds rows.
DenseProblem MakeProblem(std::uint64_t seed, std::size_t numeric, std::size_t levels, bool products, bool weighted,
                         std::size_t n) {
  std::mt19937_64 engine(seed);
  std::normal_distribution<double> normal;
  std::uniform_real_distribution<double> uniform(0.2, 5.0);
  const double rho = 0.1 * static_cast<double>(seed % 8);
  std::vector<testing::DenseTermSpec> terms;
  for (std::size_t j = 0; j < numeric; ++j) terms.emplace_back("x" + std::to_string(j));
  std::size_t width = numeric;
  if (levels > 1) {
    terms.emplace_back("grade", levels - 1, std::vector<std::string>{}, TermKind::kCategorical);
    width += levels - 1;
  }
  if (products) {
    terms.emplace_back("x0:x1", 1, std::vector<std::string>{"x0", "x1"}, TermKind::kProduct);
    terms.emplace_back("x1:x2", 1, std::vector<std::string>{"x1", "x2"}, TermKind::kProduct);
    width += 2;
  }
  arma::mat predictors(n, width);
  arma::vec y(n);
  arma::vec weights(n);
  for (std::size_t i = 0; i < n; ++i) {
    double previous = normal(engine);
    for (std::size_t j = 0; j < numeric; ++j) {
      if (j > 0) previous = rho * previous + std::sqrt(1 - rho * rho) * normal(engine);
      predictors(i, j) = previous;
    }
    std::size_t column = numeric;
    double group_effect = 0;
    if (levels > 1) {
      const std::size_t level = engine() % levels;
      for (std::size_t l = 1; l < levels; ++l) predictors(i, column + l - 1) = level == l ? 1.0 : 0.0;
      group_effect = 0.4 * static_cast<double>(level);
      column += levels - 1;
    }
    if (products) {
      predictors(i, column) = predictors(i, 0) * predictors(i, 1);
      predictors(i, column + 1) = predictors(i, 1) * predictors(i, 2);
    }
    y(i) = 1.0 + group_effect + normal(engine);
    for (std::size_t j = 0; j < std::min<std::size_t>(numeric, 1 + seed % 5); ++j) {
      y(i) += (0.5 - 0.1 * static_cast<double>(j)) * predictors(i, j);
    }
    if (products) y(i) += 0.3 * predictors(i, column);
    weights(i) = weighted ? uniform(engine) : 1.0;
  }
  DenseProblem problem = testing::MakeDenseProblem(predictors, y, terms);
  if (weighted) {
    // Refold with the weights (scales 1: what FactorFromRows uses).
    FactorBuilder builder(std::vector<double>(problem.design.column_count() + 1, 1.0), 64);
    for (std::size_t i = 0; i < n; ++i) {
      const arma::rowvec row = problem.x.row(i);
      builder.AddRow(std::span<const double>(row.memptr(), row.n_elem), y(i), weights(i));
    }
    problem.factor = builder.Finish();
  }
  return problem;
}

TEST(SubsetTreeOracle, SameSubsetsAsExhaustiveOnRandomDesignsForOneAndTwoThreads) {
  std::size_t checked = 0;
  for (std::uint64_t seed = 1; seed <= 36; ++seed) {
    const bool products = seed % 3 != 0;
    const std::size_t levels = seed % 4 == 0 ? 0 : 2 + seed % 3;
    const std::size_t numeric = 4 + seed % 13;  // with the group and products: m <= 19
    const bool weighted = seed % 2 == 1;
    const DenseProblem problem = MakeProblem(9100 + seed, numeric, levels, products, weighted, 60 + 25 * (seed % 7));
    SearchOptions options;
    options.best_per_size = 1 + seed % 3;
    options.criterion = static_cast<Criterion>(seed % 6);  // adj-r2 .. partial-f
    options.hierarchy = seed % 5 < 3;
    if (seed % 6 == 0) options.keep = {"x1"};
    if (seed % 7 == 0) options.never = {"x3"};
    if (seed % 9 == 0) options.max_terms = 4;
    const std::string label = "seed " + std::to_string(seed) + " m " + std::to_string(problem.design.terms.size()) +
                              (weighted ? " weighted" : "") + (options.hierarchy ? " hierarchy" : "") + " " +
                              ToString(options.criterion);
    const SearchResult exhaustive = Subsets(problem, options, Algorithm::kExhaustive);
    const SearchResult tree = Subsets(problem, options, Algorithm::kTree, 1);
    ExpectSameSubsets(exhaustive, tree, label);
    ExpectIdentical(tree, Subsets(problem, options, Algorithm::kTree, 2), label + " threads 2");
    ExpectSameSubsets(Subsets(problem, options, Algorithm::kDropTree), tree, label + " drop tree");
    // Each subset is read once at most.
    EXPECT_LE(tree.subsets_evaluated, exhaustive.subsets_evaluated) << label;
    // The refit oracle is unweighted; weighted designs are checked against the enumeration.
    for (const auto& subset : tree.subsets) {
      if (weighted) break;
      EXPECT_NEAR(subset.rss, testing::OracleRss(problem, subset.term_indices), 1e-8 * subset.rss) << label;
    }
    ++checked;
  }
  EXPECT_EQ(checked, 36u);
}

TEST(SubsetTreeOracle, EveryModelIsReadOnceWhenNothingCanBeCut) {
  // best_per_size as large as any size's count of subsets: nothing is ever cut, so the tree
  // reads every one of the 2^m subsets exactly once (and keeps them all).
  const DenseProblem problem = MakeProblem(4242, 9, 3, false, true, 120);  // m = 10
  SearchOptions options;
  options.best_per_size = 252;  // C(10, 5)
  options.hierarchy = false;
  const SearchResult tree = Subsets(problem, options, Algorithm::kTree);
  EXPECT_EQ(tree.subsets_evaluated, 1024u);
  EXPECT_EQ(tree.subsets.size(), 1024u);
  ExpectSameSubsets(Subsets(problem, options, Algorithm::kExhaustive), tree, "all kept");
}

TEST(SubsetTreeThreads, IdenticalOutputForOneTwoAndThreeThreads) {
  // m = 26 correlated terms of mixed strength: the subtrees are shared out in earnest.
  const DenseProblem problem = MakeProblem(777, 24, 3, false, true, 400);
  SearchOptions options;
  options.best_per_size = 3;
  options.criterion = Criterion::kBic;
  options.hierarchy = false;
  const SearchResult one = Subsets(problem, options, Algorithm::kTree, 1);
  ExpectIdentical(one, Subsets(problem, options, Algorithm::kTree, 2), "threads 2");
  ExpectIdentical(one, Subsets(problem, options, Algorithm::kTree, 3), "threads 3");
  EXPECT_GT(one.subset_nodes, 0u);
}

TEST(SubsetTreeProgress, ReportsNodesModelsAndTimeOnTheStream) {
  const DenseProblem problem = MakeProblem(31, 22, 0, false, false, 300);
  SearchOptions options;
  options.best_per_size = 60;  // cuts little: thousands of nodes
  options.hierarchy = false;
  options.method = Method::kAllSubsets;
  SearchRunOptions run;
  std::ostringstream progress;
  run.progress = &progress;
  run.progress_seconds = 0;  // a line whenever a worker has formed another 1024 nodes
  const SearchResult result = RunSearch(problem.factor, problem.design, options, nullptr, run);
  ASSERT_GE(result.subset_nodes, 1024u);
  EXPECT_NE(progress.str().find("all-subsets: "), std::string::npos) << progress.str();
  EXPECT_NE(progress.str().find(" nodes, "), std::string::npos) << progress.str();
  EXPECT_NE(progress.str().find(" models kept, "), std::string::npos) << progress.str();
  // The default waits 5 s before the first line: a short search writes none.
  std::ostringstream quiet;
  run.progress = &quiet;
  run.progress_seconds = 5;
  RunSearch(problem.factor, problem.design, options, nullptr, run);
  EXPECT_EQ(quiet.str(), "");
}

}  // namespace
}  // namespace stepledger

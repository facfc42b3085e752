// All subsets by the regression tree: the same kept subsets as the exhaustive Gray-code
// enumeration (the test oracle: every subset's RSS from one kernel move) and as the earlier
// drop tree, on invented designs (weighted rows, a categorical group, products under
// hierarchy, keep and never), for 1, 2 and 3 threads; the kept RSS refitted from the rows.

#include <gtest/gtest.h>

#include <map>
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

SearchResult Subsets(const DenseProblem& problem, SearchOptions options, Algorithm algorithm, int threads = 1) {
  options.method = Method::kAllSubsets;
  SearchRunOptions run;
  run.exhaustive_subsets = algorithm == Algorithm::kExhaustive;
  run.drop_tree_subsets = algorithm == Algorithm::kDropTree;
  run.threads = threads;
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

/// Collects the subset progress events.
class ProgressLog : public SearchObserver {
 public:
  void OnSubsetProgress(const SubsetProgressEvent& event) override { events.push_back(event); }
  std::vector<SubsetProgressEvent> events;
};

TEST(SubsetTreeProgress, ReportsNodesModelsKeptAndTimeToTheObserver) {
  const DenseProblem problem = MakeProblem(31, 22, 0, false, false, 300);
  SearchOptions options;
  options.best_per_size = 60;  // cuts little: thousands of nodes
  options.hierarchy = false;
  options.method = Method::kAllSubsets;
  for (int threads : {1, 2}) {
    SearchRunOptions run;
    run.threads = threads;
    run.progress_seconds = 0;  // an event whenever the caller's worker has formed another 1024 nodes
    ProgressLog log;
    const SearchResult result = RunSearch(problem.factor, problem.design, options, &log, run);
    ASSERT_GE(result.subset_nodes, 1024u);
    ASSERT_FALSE(log.events.empty()) << "threads " << threads;
    for (std::size_t i = 1; i < log.events.size(); ++i) {
      EXPECT_GE(log.events[i].nodes, log.events[i - 1].nodes);
      EXPECT_GE(log.events[i].seconds, log.events[i - 1].seconds);
    }
    EXPECT_LE(log.events.back().nodes, result.subset_nodes);
    EXPECT_GT(log.events.back().models_kept, 0u);
    // The default waits half a second before the first event: a short search sends none.
    ProgressLog quiet;
    run.progress_seconds = 5;
    RunSearch(problem.factor, problem.design, options, &quiet, run);
    EXPECT_TRUE(quiet.events.empty());
  }
}

/// RSS of the kept models by size (keep terms included) and rank.
std::map<std::size_t, std::vector<double>> RssBySize(const SearchResult& result) {
  std::map<std::size_t, std::vector<double>> by_size;
  for (const auto& subset : result.subsets) by_size[subset.size].push_back(subset.rss);
  return by_size;
}

TEST(SubsetTreeTolerance, EveryListedModelIsWithinTheToleranceOfTheExhaustiveModelOfItsRank) {
  // The guarantee (subset_tree.cpp): with tau, the r-th listed model of each size has an RSS at
  // most (1 + tau) times that of the r-th best of that size, the enumeration's r-th; the first is
  // within tau of the best. 32 invented designs, m <= 19, tau from 0.001 to 0.3.
  const double taus[] = {0.001, 0.01, 0.05, 0.3};
  std::size_t cut_more = 0;
  for (std::uint64_t seed = 1; seed <= 32; ++seed) {
    const DenseProblem problem =
        MakeProblem(5300 + seed, 6 + seed % 12, seed % 3 == 0 ? 3 : 0, seed % 2 == 0, seed % 4 == 1, 80 + 20 * (seed % 5));
    SearchOptions options;
    options.best_per_size = 1 + seed % 4;
    options.hierarchy = seed % 3 != 1;
    if (seed % 8 == 0) options.max_terms = 5;
    const double tau = taus[seed % 4];
    const std::string label = "seed " + std::to_string(seed) + " tau " + std::to_string(tau);
    const SearchResult exact = Subsets(problem, options, Algorithm::kExhaustive);
    const SearchResult exact_tree = Subsets(problem, options, Algorithm::kTree);
    options.subset_tolerance = tau;
    const SearchResult within = Subsets(problem, options, Algorithm::kTree);
    EXPECT_EQ(within.subset_tolerance, tau) << label;
    const auto best = RssBySize(exact);
    const auto listed = RssBySize(within);
    ASSERT_EQ(best.size(), listed.size()) << label;
    for (const auto& [size, exact_rss] : best) {
      const std::vector<double>& rss = listed.at(size);
      ASSERT_EQ(rss.size(), exact_rss.size()) << label << " size " << size;
      for (std::size_t rank = 0; rank < rss.size(); ++rank) {
        EXPECT_GE(rss[rank], exact_rss[rank] * (1 - 1e-12)) << label << " size " << size;  // never better than exact
        EXPECT_LE(rss[rank], exact_rss[rank] * (1 + tau) * (1 + 1e-12)) << label << " size " << size << " rank " << rank;
      }
      EXPECT_LE(rss.front(), exact_rss.front() * (1 + tau) * (1 + 1e-12)) << label;
    }
    EXPECT_LE(within.subset_nodes, exact_tree.subset_nodes) << label;
    if (within.subset_nodes < exact_tree.subset_nodes) ++cut_more;
  }
  EXPECT_GE(cut_more, 16u);  // the tolerance does cut: on most designs it forms fewer nodes
}

TEST(SubsetTreeTolerance, RunsOnOneThreadSoTheListDependsOnTheDataAlone) {
  const DenseProblem problem = MakeProblem(778, 24, 3, false, true, 400);
  SearchOptions options;
  options.best_per_size = 3;
  options.hierarchy = false;
  options.subset_tolerance = 0.02;
  const SearchResult one = Subsets(problem, options, Algorithm::kTree, 1);
  ExpectIdentical(one, Subsets(problem, options, Algorithm::kTree, 2), "threads 2");
  ExpectIdentical(one, Subsets(problem, options, Algorithm::kTree, 3), "threads 3");
  EXPECT_EQ(one.subset_nodes, Subsets(problem, options, Algorithm::kTree, 3).subset_nodes);
}

TEST(SubsetTreeTolerance, TheGuaranteeIsStatedInWords) {
  const DenseProblem problem = MakeProblem(12, 8, 0, false, false, 100);
  SearchOptions options;
  const SearchResult exact = Subsets(problem, options, Algorithm::kTree);
  EXPECT_EQ(exact.SubsetGuarantee(), "exact: the models listed for each size are that size's best by RSS");
  options.subset_tolerance = 0.01;
  const SearchResult within = Subsets(problem, options, Algorithm::kTree);
  EXPECT_EQ(within.SubsetGuarantee(),
            "within a relative tolerance of 0.01: the r-th model listed for each size has an RSS at most (1 + 0.01) "
            "times that of the size's r-th best model, so the first is within 0.01 of the best");
  EXPECT_NE(within.FullReport().find(within.SubsetGuarantee()), std::string::npos);
  EXPECT_NE(within.steps.front().rule.find("within a relative tolerance of 0.01"), std::string::npos);
  // The enumeration is exact whatever the plan's tolerance.
  EXPECT_EQ(Subsets(problem, options, Algorithm::kExhaustive).subset_tolerance, 0.0);
}

}  // namespace
}  // namespace stepledger

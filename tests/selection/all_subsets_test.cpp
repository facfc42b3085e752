// All subsets: branch and bound against the exhaustive Gray-code enumeration (the test
// oracle), the Hald cement best subsets, and the constraints inside subsets.

#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/selection/search.h"
#include "support/refit_oracle.h"
#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

using testing::DenseProblem;

SearchResult Subsets(const DenseProblem& problem, SearchOptions options, bool exhaustive) {
  options.method = Method::kAllSubsets;
  SearchRunOptions run;
  run.exhaustive_subsets = exhaustive;
  return RunSearch(problem.factor, problem.design, options, nullptr, run);
}

std::string Describe(const SubsetRecord& subset) {
  std::string text = std::to_string(subset.size) + "#" + std::to_string(subset.rank_in_size) + ":";
  for (const auto& term : subset.terms) text += " " + term;
  return text;
}

void ExpectSameSubsets(const SearchResult& exhaustive, const SearchResult& bounded, const std::string& label) {
  ASSERT_EQ(exhaustive.subsets.size(), bounded.subsets.size()) << label;
  for (std::size_t i = 0; i < exhaustive.subsets.size(); ++i) {
    EXPECT_EQ(Describe(exhaustive.subsets[i]), Describe(bounded.subsets[i])) << label;
    EXPECT_NEAR(exhaustive.subsets[i].rss, bounded.subsets[i].rss, 1e-9 * exhaustive.subsets[i].rss) << label;
  }
  EXPECT_EQ(exhaustive.final_terms, bounded.final_terms) << label;
}

TEST(AllSubsetsHald, BestModelsBySizeMatchTheReferenceTable) {
  const auto hald = testing::LoadHald();
  SearchOptions options;
  options.best_per_size = 2;
  options.criterion = Criterion::kBic;
  const SearchResult result = Subsets(hald, options, false);
  // RSS from tests/reference/NOTES.md (exact rational refit of hald.csv); the best
  // subsets {x4}, {x1, x2}, {x1, x4}, {x1, x2, x4} are the textbook ones (Draper and Smith).
  struct Expected { std::size_t size; std::size_t rank; std::vector<std::string> terms; double rss; };
  const std::vector<Expected> expected = {
      {0, 1, {}, 2715.763077},
      {1, 1, {"x4"}, 883.8669169},     {1, 2, {"x2"}, 906.3363435},
      {2, 1, {"x1", "x2"}, 57.90448318}, {2, 2, {"x1", "x4"}, 74.76211216},
      {3, 1, {"x1", "x2", "x4"}, 47.97272940}, {3, 2, {"x1", "x2", "x3"}, 48.11061407},
      {4, 1, {"x1", "x2", "x3", "x4"}, 47.86363935},
  };
  ASSERT_EQ(result.subsets.size(), expected.size());
  for (std::size_t i = 0; i < expected.size(); ++i) {
    EXPECT_EQ(result.subsets[i].size, expected[i].size);
    EXPECT_EQ(result.subsets[i].rank_in_size, expected[i].rank);
    EXPECT_EQ(result.subsets[i].terms, expected[i].terms);
    EXPECT_NEAR(result.subsets[i].rss, expected[i].rss, 1e-6 * expected[i].rss) << i;
  }
  // BIC (the README's convention) prefers {x1, x2}: the smallest of the table by hand
  // (n ln(RSS/n) + ln(n) k is lowest there among the kept models; common practice result).
  EXPECT_EQ(result.final_terms, (std::vector<std::string>{"x1", "x2"}));
  EXPECT_EQ(result.outcome, SearchOutcome::kCompleted);
  ExpectSameSubsets(Subsets(hald, options, true), result, "hald");
}

TEST(AllSubsetsOracle, BranchAndBoundEqualsExhaustiveOnRandomDataSets) {
  std::size_t checked = 0;
  for (std::uint64_t seed = 1; seed <= 50; ++seed) {
    testing::RandomProblemOptions data;
    data.seed = 5000 + seed;
    data.n = 30 + 40 * (seed % 8);
    data.numeric_terms = 4 + seed % 11;  // up to 14, + the categorical term: m <= 15
    data.categorical_levels = seed % 2 == 0 ? 3 : 0;
    data.correlation = 0.1 * static_cast<double>(seed % 10);
    data.true_terms = 1 + seed % 4;
    const DenseProblem problem = testing::MakeRandomProblem(data);
    SearchOptions options;
    options.best_per_size = 1 + seed % 3;
    options.criterion = static_cast<Criterion>(seed % 6);  // adj-r2 .. partial-f
    const std::string label = "seed " + std::to_string(data.seed) + " m " +
                              std::to_string(problem.design.terms.size()) + " " + ToString(options.criterion);
    const SearchResult exhaustive = Subsets(problem, options, true);
    const SearchResult bounded = Subsets(problem, options, false);
    ExpectSameSubsets(exhaustive, bounded, label);
    EXPECT_LE(bounded.subsets_evaluated, exhaustive.subsets_evaluated) << label;
    // The kept RSS are the least-squares RSS refitted from the rows.
    for (const auto& subset : bounded.subsets) {
      EXPECT_NEAR(subset.rss, testing::OracleRss(problem, subset.term_indices), 1e-8 * subset.rss) << label;
    }
    ++checked;
  }
  EXPECT_EQ(checked, 50u);
}

TEST(AllSubsetsConstraints, KeepNeverMaxTermsAndHierarchyHoldInEverySubset) {
  // x1, x2, x3, x1:x2 (built on x1 and x2), x4: invented data with a true interaction.
  testing::RandomProblemOptions data;
  data.seed = 77;
  data.n = 300;
  data.numeric_terms = 4;
  data.true_terms = 3;
  DenseProblem base = testing::MakeRandomProblem(data);
  arma::mat predictors = base.x.cols(1, 4);
  predictors.insert_cols(3, predictors.col(0) % predictors.col(1));
  arma::vec y = base.y + 0.02 * predictors.col(3);
  const DenseProblem problem = testing::MakeDenseProblem(
      predictors, y, {{"x1"}, {"x2"}, {"x3"}, {"x1:x2", 1, {"x1", "x2"}, TermKind::kProduct}, {"x4"}});
  SearchOptions options;
  options.keep = {"x3"};
  options.never = {"x4"};
  options.max_terms = 3;
  options.best_per_size = 3;
  for (bool exhaustive : {true, false}) {
    const SearchResult result = Subsets(problem, options, exhaustive);
    ASSERT_FALSE(result.subsets.empty());
    for (const auto& subset : result.subsets) {
      const auto has = [&](const std::string& term) {
        return std::find(subset.terms.begin(), subset.terms.end(), term) != subset.terms.end();
      };
      EXPECT_TRUE(has("x3")) << Describe(subset);
      EXPECT_FALSE(has("x4")) << Describe(subset);
      EXPECT_LE(subset.size, 3u) << Describe(subset);
      if (has("x1:x2")) {
        EXPECT_TRUE(has("x1") && has("x2")) << Describe(subset);
      }
    }
    // Sizes 1..3 (keep counted); {x3, x1:x2} and {x3, x1, x1:x2} break hierarchy.
    EXPECT_EQ(result.subsets.front().size, 1u);
    EXPECT_EQ(result.subsets.back().size, 3u);
  }
  ExpectSameSubsets(Subsets(problem, options, true), Subsets(problem, options, false), "constraints");
}

// ---- hopeless searches are refused before they start ----

std::vector<testing::DenseTermSpec> NumericTerms(std::size_t count) {
  std::vector<testing::DenseTermSpec> terms;
  for (std::size_t t = 0; t < count; ++t) terms.emplace_back("x" + std::to_string(t));
  return terms;
}

std::string RefusalOf(const SearchOptions& options, const Design& design) {
  try {
    ValidateSearchOptions(options, design);
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "method");
    return error.what();
  }
  return "";
}

TEST(AllSubsetsLimits, TheWorstCaseCountsTheSubsetsOfAtMostMaxTerms) {
  // log2 of sum_{s <= p} C(m, s), against exact integer sums (Python's math.comb).
  EXPECT_DOUBLE_EQ(AllSubsetsWorstCaseLog2(50, 50), 50.0);
  EXPECT_DOUBLE_EQ(AllSubsetsWorstCaseLog2(10, 0), 0.0);
  EXPECT_NEAR(AllSubsetsWorstCaseLog2(60, 17), 49.12610613054918, 1e-9);
  EXPECT_NEAR(AllSubsetsWorstCaseLog2(1000, 3), 27.3123975753784, 1e-9);
  EXPECT_NEAR(AllSubsetsWorstCaseLog2(200, 8), 45.707821631955056, 1e-9);
}

TEST(AllSubsetsLimits, AHopelessWorstCaseIsRefusedAtTheMethodKeySayingHowToGoOn) {
  const Design design = testing::MakeDenseDesign(NumericTerms(60));
  SearchOptions options;
  options.method = Method::kAllSubsets;
  // 2^60 subsets: past 2^50, and past the 2^55 of a tolerance search, so no tolerance is offered.
  std::string refusal = RefusalOf(options, design);
  EXPECT_NE(refusal.find("all-subsets over 60 candidate terms (60 terms, 0 kept, 0 never) could have to read "
                         "2^60.0 subsets; it takes plans of at most 2^50.0: set \"max_terms\" to at most 17 "
                         "(2^49.1 subsets), or use \"method\": \"stepwise\""),
            std::string::npos)
      << refusal;
  options.subset_tolerance = 0.01;
  EXPECT_NE(RefusalOf(options, design).find("it takes plans of at most 2^55.0 with a tolerance"), std::string::npos)
      << RefusalOf(options, design);
  options.subset_tolerance = 0;
  // The max_terms it names is accepted, one more is not.
  options.max_terms = 17;
  EXPECT_EQ(RefusalOf(options, design), "");
  options.max_terms = 18;
  EXPECT_NE(RefusalOf(options, design).find("at most 18 terms) could have to read 2^50."), std::string::npos)
      << RefusalOf(options, design);
  // 53 candidates (7 never): 2^53 is past 2^50 but within a tolerance search's 2^55, which is
  // offered, and taken.
  options.max_terms.reset();
  options.never = {"x0", "x1", "x2", "x3", "x4", "x5", "x6"};
  EXPECT_NE(RefusalOf(options, design).find("or allow a \"subset_tolerance\" (such as 0.01"), std::string::npos)
      << RefusalOf(options, design);
  options.subset_tolerance = 0.01;
  EXPECT_EQ(RefusalOf(options, design), "");
  // Kept and never terms are not candidates: 60 - 5 - 5 = 50, 2^50, is accepted exactly; one
  // candidate more is not.
  options.subset_tolerance = 0;
  options.keep = {"x0", "x1", "x2", "x3", "x4"};
  options.never = {"x5", "x6", "x7", "x8", "x9"};
  EXPECT_EQ(RefusalOf(options, design), "");
  options.never.pop_back();
  EXPECT_NE(RefusalOf(options, design).find("51 candidate terms (60 terms, 5 kept, 4 never)"), std::string::npos);
  // Other methods take any number of terms.
  options.keep.clear();
  options.never.clear();
  options.method = Method::kStepwise;
  EXPECT_NO_THROW(ValidateSearchOptions(options, design));
}

TEST(AllSubsetsLimits, ATreeTooLargeForMemoryIsRefusedEvenWithMaxTerms) {
  // 500 one-column terms with max_terms 2: few subsets (2^16.9), but a triangle of 501 columns at
  // each of 501 depths is 959 MB per thread.
  const Design design = testing::MakeDenseDesign(NumericTerms(500));
  SearchOptions options;
  options.method = Method::kAllSubsets;
  options.max_terms = 2;
  const std::string refusal = RefusalOf(options, design);
  EXPECT_NE(refusal.find("all-subsets over 500 candidate terms of 500 design columns would hold 959 MB of "
                         "triangles per thread; it takes at most 512 MB"),
            std::string::npos)
      << refusal;
  // 300 terms with max_terms 3: 2^22.1 subsets, 208 MB: taken.
  const Design smaller = testing::MakeDenseDesign(NumericTerms(300));
  options.max_terms = 3;
  EXPECT_EQ(RefusalOf(options, smaller), "");
}

TEST(AllSubsetsLimits, RunSearchRefusesBeforeExaminingAnySubset) {
  // 60 terms of similar small effect: the branch and bound could bound little away. The
  // refusal comes at once.
  testing::RandomProblemOptions random;
  random.numeric_terms = 60;
  random.true_terms = 60;
  random.effect = 0.05;
  random.n = 400;
  const DenseProblem problem = testing::MakeRandomProblem(random);
  SearchOptions options;
  options.criterion = Criterion::kBic;
  const auto started = std::chrono::steady_clock::now();
  EXPECT_THROW(Subsets(problem, options, /*exhaustive=*/false), PlanError);
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count(), 1.0);
}

}  // namespace
}  // namespace stepledger

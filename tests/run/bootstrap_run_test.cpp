// The Poisson bootstrap of a run (run/src/bootstrap_run.h): the summaries on hand-made replicate
// outcomes, a simulation whose true model the test knows, the same bits for any thread count,
// and the plans it refuses.

#include "../../run/src/bootstrap_run.h"

#include <map>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/profile.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/run/run_plan.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

Design ThreeTermDesign(testing::TempDir& folder) {
  const auto path = folder.Write("three.csv", "y,a,b,c\n1,2,3,4\n2,3,5,7\n3,5,8,1\n4,1,1,2\n5,8,2,9\n");
  DesignSpec spec;
  spec.response = "y";
  for (const char* name : {"a", "b", "c"}) {
    TermSpec term;
    term.name = name;
    term.kind = TermKind::kNumeric;
    term.column = name;
    term.key_path = std::string("terms[") + name + "]";
    spec.terms.push_back(term);
  }
  return BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
}

// Ten replicates: a always; b in the first five, c in the last five (b and c never together).
std::vector<run_detail::ReplicateOutcome> HandMadeOutcomes(const Design& design) {
  std::vector<run_detail::ReplicateOutcome> outcomes(10);
  const std::size_t a = design.FindTerm("a"), b = design.FindTerm("b"), c = design.FindTerm("c");
  for (std::size_t r = 0; r < 10; ++r) {
    outcomes[r].coefficients.assign(design.column_count(), 0.0);
    outcomes[r].terms = {a, r < 5 ? b : c};
    outcomes[r].coefficients[design.TermColumns(a)[0]] = static_cast<double>(r + 1);
    outcomes[r].coefficients[design.TermColumns(r < 5 ? b : c)[0]] = 2.0;
  }
  return outcomes;
}

TEST(BootstrapSummary, FrequenciesModelsIntervalsAndSubstitutes) {
  testing::TempDir folder;
  const Design design = ThreeTermDesign(folder);
  const std::size_t a = design.FindTerm("a"), b = design.FindTerm("b");
  const BootstrapValidation summary =
      run_detail::SummariseReplicates(HandMadeOutcomes(design), design, {10, 5}, {b, a}, 0.5);

  ASSERT_EQ(summary.inclusion.size(), 3u);
  EXPECT_EQ(summary.inclusion[0], (TermInclusion{"a", 1.0}));
  EXPECT_EQ(summary.inclusion[1], (TermInclusion{"b", 0.5}));
  EXPECT_EQ(summary.inclusion[2], (TermInclusion{"c", 0.5}));
  EXPECT_EQ(summary.sizes, (std::vector<SizeFrequency>{{2, 10}}));

  // Two models of five replicates each: the tie goes to plan order ({a, b} before {a, c}); the
  // run's own model is {a, b}, given in another order.
  ASSERT_EQ(summary.models.size(), 2u);
  EXPECT_EQ(summary.models[0], (ModelFrequency{{"a", "b"}, 0.5, true}));
  EXPECT_EQ(summary.models[1], (ModelFrequency{{"a", "c"}, 0.5, false}));
  EXPECT_TRUE(summary.chosen_among_top);

  // Percentile intervals at level 0.5: Hyndman and Fan's definition 5 puts the 25% and 75%
  // points of ten values at positions 10 x 0.25 + 0.5 = 3 and 10 x 0.75 + 0.5 = 8 (hand computed
  // from the definition): a's estimates 1..10 give [3, 8].
  ASSERT_EQ(summary.coefficients.size(), 3u);
  EXPECT_EQ(summary.coefficients[0].name, "a");
  ASSERT_TRUE(summary.coefficients[0].conditional.has_value());
  EXPECT_DOUBLE_EQ(summary.coefficients[0].conditional->first, 3.0);
  EXPECT_DOUBLE_EQ(summary.coefficients[0].conditional->second, 8.0);
  // b: 2 in five replicates, left out (0) in five: conditional [2, 2], unconditional [0, 2].
  EXPECT_EQ(summary.coefficients[1].conditional, (std::pair<double, double>{2.0, 2.0}));
  EXPECT_EQ(summary.coefficients[1].unconditional, (std::pair<double, double>{0.0, 2.0}));
  EXPECT_DOUBLE_EQ(summary.coefficients[1].inclusion, 0.5);

  // b and c: never together, each alone in half the replicates: statistic 1, past the threshold.
  ASSERT_EQ(summary.substitutes.size(), 1u);
  EXPECT_EQ(summary.substitutes[0], (SubstitutePair{"b", "c", 0.0, 0.5, 0.5, 1.0}));
}

TEST(BootstrapSummary, PairsChosenTogetherOrRarelyAloneAreNotSubstitutes) {
  testing::TempDir folder;
  const Design design = ThreeTermDesign(folder);
  std::vector<run_detail::ReplicateOutcome> outcomes = HandMadeOutcomes(design);
  // b now also in replicates 5 and 6 beside c: together 2 of min(7, 5) -> statistic 0.6 < 0.8.
  for (std::size_t r : {5, 6}) outcomes[r].terms.push_back(design.FindTerm("b"));
  const BootstrapValidation summary = run_detail::SummariseReplicates(outcomes, design, {10, 5}, {}, 0.95);
  EXPECT_TRUE(summary.substitutes.empty());
  EXPECT_FALSE(summary.chosen_among_top) << "the intercept-only model is not among them";
}

// Invented data with a stated true model: price = 50 + 4 strong + 0.35 weak + e, e ~ N(0, 3^2),
// with four null columns; the strong term's t is near 90, the weak one's near 3.7.
std::string SimulatedRows(std::size_t rows) {
  testing::TestRandom random(20261204);
  std::ostringstream csv;
  csv.precision(17);
  csv << "price,strong,weak,null1,null2,null3,null4\n";
  for (std::size_t i = 0; i < rows; ++i) {
    const double strong = random.Normal(), weak = random.Normal();
    csv << 50 + 4 * strong + 0.35 * weak + 3 * random.Normal() << "," << strong << "," << weak;
    for (int j = 0; j < 4; ++j) csv << "," << random.Normal();
    csv << "\n";
  }
  return csv.str();
}

LoadedPlan SimulationPlan(const std::string& criterion, const std::string& extra = "") {
  return ParsePlanText(R"({"response": "price", "terms": "all", "method": "stepwise", "criterion": ")" + criterion +
                       R"(", "bootstrap": {"replicates": 200, "seed": 11})" + extra + "}");
}

TEST(BootstrapRun, InclusionFrequenciesOrderStrongWeakAndNullTerms) {
  testing::TempDir folder;
  const auto data = folder.Write("simulated.csv", SimulatedRows(2000));
  RunOptions options;
  options.threads = 2;
  const RunResult run = RunPlan(data, SimulationPlan("bic"), options);
  ASSERT_TRUE(run.validation.bootstrap.has_value());
  const BootstrapValidation& bootstrap = *run.validation.bootstrap;
  std::map<std::string, double> frequency;
  for (const TermInclusion& term : bootstrap.inclusion) frequency[term.term] = term.frequency;
  ASSERT_EQ(frequency.size(), 6u);
  EXPECT_GE(frequency["strong"], 0.95);
  for (const char* null_term : {"null1", "null2", "null3", "null4"}) {
    EXPECT_LE(frequency[null_term], 0.3) << null_term;
    EXPECT_GT(frequency["weak"], frequency[null_term]) << null_term;
  }
  int replicates = 0;
  for (const SizeFrequency& size : bootstrap.sizes) replicates += static_cast<int>(size.replicates);
  EXPECT_EQ(replicates, 200);
  // The replicates' own counts: sum over models can be below 1 only by models past the tenth.
  double top = 0;
  for (const ModelFrequency& model : bootstrap.models) top += model.frequency;
  EXPECT_LE(top, 1.0 + 1e-12);
  EXPECT_EQ(bootstrap.coefficients.size(), 6u);
}

TEST(BootstrapRun, TheSameBitsForThreadsOneTwoAndThree) {
  testing::TempDir folder;
  const auto data = folder.Write("simulated.csv", SimulatedRows(3000));
  const LoadedPlan plan = SimulationPlan("aic", R"(, "holdout": {"fraction": 0.3, "seed": 2})");
  std::optional<BootstrapValidation> expected;
  for (int threads : {1, 2, 3}) {
    RunOptions options;
    options.threads = threads;
    const RunResult run = RunPlan(data, plan, options);
    ASSERT_TRUE(run.validation.bootstrap.has_value());
    if (!expected) {
      expected = run.validation.bootstrap;
      continue;
    }
    EXPECT_TRUE(*run.validation.bootstrap == *expected) << threads << " threads";
  }
}

TEST(BootstrapRun, CriterionCvIsRefusedBeforeAnyPass) {
  testing::TempDir folder;
  const auto data = folder.Write("simulated.csv", SimulatedRows(200));
  try {
    RunPlan(data, SimulationPlan("cv"), RunOptions{});
    FAIL() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "bootstrap");
    EXPECT_NE(std::string(error.what()).find("criterion"), std::string::npos) << error.what();
  }
}

TEST(BootstrapRun, ReplicatesPastTheMemoryBudgetAreRefusedNamingTheKey) {
  // A categorical term of 300 levels: 300 design columns with the intercept; 3,000 replicates
  // take 3,000 x (301^2 + 128 x 301) x 8 bytes, about 3.1 GB, past the 1 GiB budget.
  testing::TempDir folder;
  std::ostringstream csv;
  csv << "y,code\n";
  for (int row = 0; row < 600; ++row) csv << row % 7 << ",M" << row % 300 << "\n";
  const auto path = folder.Write("wide.csv", csv.str());
  DesignSpec spec;
  spec.response = "y";
  TermSpec code;
  code.name = "code";
  code.kind = TermKind::kCategorical;
  code.column = "code";
  code.key_path = "terms[0]";
  spec.terms.push_back(code);
  spec.max_levels = 1000;
  ProfileOptions profile;
  profile.max_levels = 1000;
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}, profile));
  ASSERT_EQ(design.column_count(), 300u);
  SearchOptions search;
  search.bootstrap = BootstrapSettings{3000, 1};
  try {
    run_detail::CheckBootstrapPlan(search, design);
    FAIL() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "bootstrap.replicates");
    EXPECT_NE(std::string(error.what()).find("fewer replicates"), std::string::npos) << error.what();
  }
  search.bootstrap = BootstrapSettings{200, 1};
  EXPECT_NO_THROW(run_detail::CheckBootstrapPlan(search, design));
}

}  // namespace
}  // namespace stepledger

// The plan file: every key, every error (key path and message), malformed JSON positions,
// the normalised form and its round trip, and the quick plan.

#include "stepledger/io/plan_file.h"

#include <sys/stat.h>

#include <chrono>
#include <csignal>
#include <filesystem>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/limits.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/profile.h"
#include "stepledger/selection/search.h"
#include "support/input_error.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::TempDir;
using testing::LimitErrorOf;

// The contract's example plan (CONTRACT.md "Plan file (JSON)"), minus never (no postcode term).
constexpr const char* kContractPlan = R"({
  "response": "resale_price",
  "response_transform": "log",
  "intercept": true,
  "weights": "units",
  "terms": [
    {"name": "age",        "column": "age_months"},
    {"name": "age^2",      "power": {"column": "age_months", "degree": 2}},
    {"name": "log_disk",   "log": "disk_gb"},
    {"name": "grade",      "categorical": "grade", "baseline": "C"},
    {"name": "age:grade",  "product": ["age", "grade"]}
  ],
  "keep": ["age"],
  "never": ["log_disk"],
  "method": "stepwise",
  "criterion": "bic",
  "entry_p": 0.05,
  "exit_p": 0.10,
  "hierarchy": true,
  "max_terms": 15,
  "best_per_size": 3,
  "folds": 10,
  "seed": 20261201,
  "missing": ["", "NA"]
})";

PlanError ParseError(const std::string& text) {
  try {
    ParsePlanText(text, "p.json");
  } catch (const PlanError& error) {
    return error;
  }
  ADD_FAILURE() << "expected a PlanError for " << text;
  return PlanError("", "none");
}

// A minimal valid plan with one key replaced or added (value as JSON text).
std::string With(const std::string& key, const std::string& value) {
  json plan = json::parse(R"({"response": "price", "terms": [{"name": "age", "column": "age"},
                               {"name": "grade", "categorical": "grade"}]})");
  plan[key] = json::parse(value);
  return plan.dump();
}

std::string WithTerm(const std::string& term) {
  return R"({"response": "price", "terms": [{"name": "age", "column": "age"}, )" + term + "]}";
}

struct ErrorCase {
  std::string label;
  std::string text;
  std::string key_path;
  std::string message_part;
};

class PlanFileErrorTest : public ::testing::TestWithParam<ErrorCase> {};

TEST_P(PlanFileErrorTest, NamesKeyAndSaysWhatWasExpected) {
  const ErrorCase& c = GetParam();
  const PlanError error = ParseError(c.text);
  EXPECT_EQ(error.key_path(), c.key_path) << error.what();
  EXPECT_NE(std::string(error.what()).find(c.message_part), std::string::npos) << error.what();
  if (!c.key_path.empty()) {
    EXPECT_EQ(std::string(error.what()).rfind("plan key '" + c.key_path + "': ", 0), 0u) << error.what();
  }
}

const std::vector<ErrorCase> kErrorCases = {
    {"MissingResponse", R"({"terms": "all"})", "response", "missing"},
    {"ResponseNotString", With("response", "3"), "response", "expected a string, found 3"},
    {"EmptyResponse", With("response", R"("")"), "response", "expected a non-empty string"},
    {"BadTransform", With("response_transform", R"("sqrt")"), "response_transform",
     R"(expected "log" or "none", found "sqrt")"},
    {"InterceptNotBool", With("intercept", "1"), "intercept", "expected true or false, found 1"},
    {"WeightsNotString", With("weights", "[1]"), "weights", "expected a string, found [1]"},
    {"MissingTerms", R"({"response": "price"})", "terms", "missing"},
    {"TermsOtherString", With("terms", R"("every")"), "terms",
     R"(expected an array of term objects or "all", found "every")"},
    {"TermsNumber", With("terms", "4"), "terms", "found 4"},
    {"TermsEmpty", With("terms", "[]"), "terms", "expected at least one term"},
    {"TermNotObject", With("terms", R"(["age"])"), "terms[0]", R"(expected an object, found "age")"},
    {"TermWithoutName", WithTerm(R"({"column": "disk"})"), "terms[1].name", "missing"},
    {"TermEmptyName", WithTerm(R"({"name": "", "column": "disk"})"), "terms[1].name",
     "non-empty"},
    {"TermNamedIntercept", WithTerm(R"({"name": "intercept", "column": "disk"})"),
     "terms[1].name", "reserved"},
    {"TermWithoutKind", WithTerm(R"({"name": "disk"})"), "terms[1]", "found none"},
    {"TermWithTwoKinds", WithTerm(R"({"name": "disk", "column": "disk", "log": "disk"})"),
     "terms[1]", "exactly one of"},
    {"TermUnknownKey", WithTerm(R"({"name": "disk", "column": "disk", "colour": "red"})"),
     "terms[1].colour", "unknown key"},
    {"BaselineOnNumeric", WithTerm(R"({"name": "disk", "column": "disk", "baseline": "A"})"),
     "terms[1].baseline", "categorical term only"},
    {"PowerNotObject", WithTerm(R"({"name": "a2", "power": "age"})"), "terms[1].power",
     R"(expected an object, found "age")"},
    {"PowerUnknownKey", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 2, "exp": 1}})"),
     "terms[1].power.exp", "unknown key"},
    {"PowerWithoutDegree", WithTerm(R"({"name": "a2", "power": {"column": "age"}})"),
     "terms[1].power.degree", "missing"},
    {"PowerFractionalDegree", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 1.5}})"),
     "terms[1].power.degree", "expected an integer >= 2, found 1.5"},
    {"PowerDegreeOne", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 1}})"),
     "terms[1].power.degree", "expected an integer >= 2, found 1"},
    {"PowerDegreeAsFloat", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 2.0}})"),
     "terms[1].power.degree", "expected an integer >= 2, found 2.0"},
    {"PowerDegreeThirteen", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 13}})"),
     "terms[1].power.degree", "expected an integer from 2 to 12, found 13"},
    // Repeated products per row: a degree of 2^31 - 1 would never finish (kMaxPowerDegree).
    {"PowerDegreeHuge", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 2147483647}})"),
     "terms[1].power.degree", "expected an integer from 2 to 12, found 2147483647"},
    {"PowerDegreeBeyondInt", WithTerm(R"({"name": "a2", "power": {"column": "age", "degree": 99999999999}})"),
     "terms[1].power.degree", "expected an integer from 2 to 12, found 99999999999"},
    {"LogNotString", WithTerm(R"({"name": "l", "log": 3})"), "terms[1].log",
     "expected a string, found 3"},
    {"CategoricalBaselineNotString", WithTerm(R"({"name": "g", "categorical": "g", "baseline": 1})"),
     "terms[1].baseline", "expected a string, found 1"},
    {"ProductOfOne", WithTerm(R"({"name": "p", "product": ["age"]})"), "terms[1].product",
     "expected an array of two term names"},
    {"ProductUnknownPart", WithTerm(R"({"name": "p", "product": ["age", "disk"]})"),
     "terms[1].product[1]", "no term named 'disk'"},
    {"ProductWithItself", WithTerm(R"({"name": "p", "product": ["age", "age"]})"),
     "terms[1].product", "with itself"},
    {"ProductCycle",
     WithTerm(R"({"name": "p", "product": ["age", "q"]}, {"name": "q", "product": ["p", "age"]})"),
     "terms[1].product", "cycle"},
    {"DuplicateTermNames", WithTerm(R"({"name": "age", "column": "disk"})"), "terms[1].name",
     "duplicate term name 'age', also terms[0].name"},
    {"KeepUnknown", With("keep", R"(["disk"])"), "keep[0]", "no term named 'disk' in the plan"},
    {"KeepNotArray", With("keep", R"("age")"), "keep", R"(expected an array of strings, found "age")"},
    {"NeverItemNotString", With("never", "[1]"), "never[0]", "expected a string, found 1"},
    {"KeepTwice", With("keep", R"(["age", "age"])"), "keep[1]", "listed twice (also keep[0])"},
    {"KeepAndNever",
     R"({"response": "price", "terms": [{"name": "age", "column": "age"}], "keep": ["age"],
        "never": ["age"]})",
     "never[0]", "also in keep[0]"},
    {"UnknownMethod", With("method", R"("sideways")"), "method", R"(found "sideways")"},
    {"UnknownCriterion", With("criterion", R"("r2")"), "criterion", R"(found "r2")"},
    {"EntryPOutOfRange", With("entry_p", "1"), "entry_p", "expected a number in (0, 1), found 1"},
    {"ExitPNotNumber", With("exit_p", R"("0.1")"), "exit_p", R"(found "0.1")"},
    {"StepwiseEntryAboveExit",
     R"({"response": "price", "terms": [{"name": "age", "column": "age"}], "method": "stepwise",
        "criterion": "partial-f", "entry_p": 0.2, "exit_p": 0.1})",
     "entry_p", "forever"},
    {"HierarchyNotBool", With("hierarchy", R"("yes")"), "hierarchy", "expected true or false"},
    {"MaxTermsZero", With("max_terms", "0"), "max_terms", "expected an integer >= 1, found 0"},
    {"MaxTermsBelowKeep",
     R"({"response": "price", "terms": [{"name": "a", "column": "a"}, {"name": "b", "column": "b"}],
        "keep": ["a", "b"], "max_terms": 1})",
     "max_terms", "expected at least 2"},
    {"BestPerSizeZero", With("best_per_size", "0"), "best_per_size", "expected an integer >= 1, found 0"},
    // subset_tolerance: 0 <= tau < 1 (selection/plan.h).
    {"SubsetToleranceNegative", With("subset_tolerance", "-0.01"), "subset_tolerance",
     "expected a number from 0 up to but not including 1, found -0.01"},
    {"SubsetToleranceOne", With("subset_tolerance", "1"), "subset_tolerance",
     "expected a number from 0 up to but not including 1, found 1"},
    {"SubsetToleranceText", With("subset_tolerance", R"("0.01")"), "subset_tolerance", R"(found "0.01")"},
    {"SubsetToleranceNull", With("subset_tolerance", "null"), "subset_tolerance", "found null"},
    // The validation keys (README "The plan file"); ranges from engine/resampling.h.
    {"FoldsOne", With("folds", "1"), "folds", "expected an integer from 2 to 100, found 1"},
    {"FoldsZero", With("folds", "0"), "folds", "expected an integer from 2 to 100, found 0"},
    {"FoldsNegative", With("folds", "-3"), "folds", "expected an integer from 2 to 100, found -3"},
    {"Folds101", With("folds", "101"), "folds", "expected an integer from 2 to 100, found 101"},
    {"FoldsBeyondInt", With("folds", "4294967298"), "folds", "expected an integer from 2 to 100, found 4294967298"},
    {"FoldsFraction", With("folds", "2.5"), "folds", "expected an integer from 2 to 100, found 2.5"},
    {"FoldsAsFloat", With("folds", "10.0"), "folds", "found 10.0"},
    {"FoldsText", With("folds", R"("10")"), "folds", R"(found "10")"},
    {"SeedText", With("seed", R"("7")"), "seed", R"(expected an integer from 0 to 18446744073709551615 (2^64 - 1), found "7")"},
    {"SeedExponent", With("seed", "1e3"), "seed", "found 1000.0"},
    {"SeedTwoToThe64", With("seed", "18446744073709551616"), "seed", "expected an integer from 0 to 18446744073709551615"},
    {"SeedNull", With("seed", "null"), "seed", "found null"},
    {"HoldoutNotObject", With("holdout", "0.2"), "holdout", "expected an object, found 0.2"},
    {"HoldoutArray", With("holdout", "[0.2, 7]"), "holdout", "expected an object, found [0.2,7]"},
    {"HoldoutUnknownKey", With("holdout", R"({"share": 0.2})"), "holdout.share",
     "unknown key; the keys here are fraction, seed"},
    {"HoldoutFractionZero", With("holdout", R"({"fraction": 0})"), "holdout.fraction",
     "expected a number strictly between 0 and 1, found 0"},
    {"HoldoutFractionOne", With("holdout", R"({"fraction": 1.0})"), "holdout.fraction",
     "expected a number strictly between 0 and 1, found 1"},
    {"HoldoutFractionNegative", With("holdout", R"({"fraction": -0.1})"), "holdout.fraction", "found -0.1"},
    {"HoldoutFractionText", With("holdout", R"({"fraction": "0.2"})"), "holdout.fraction",
     R"(expected a number strictly between 0 and 1, found "0.2")"},
    {"HoldoutSeedNegative", With("holdout", R"({"seed": -7})"), "holdout.seed",
     "expected an integer from 0 to 18446744073709551615 (2^64 - 1), found -7"},
    {"HoldoutSeedFraction", With("holdout", R"({"seed": 7.5})"), "holdout.seed", "found 7.5"},
    {"BootstrapNotObject", With("bootstrap", "200"), "bootstrap", "expected an object, found 200"},
    {"BootstrapUnknownKey", With("bootstrap", R"({"replicates": 10, "samples": 10})"), "bootstrap.samples",
     "unknown key; the keys here are replicates, seed"},
    {"BootstrapReplicatesZero", With("bootstrap", R"({"replicates": 0})"), "bootstrap.replicates",
     "expected an integer from 1 to 100000, found 0"},
    {"BootstrapReplicates100001", With("bootstrap", R"({"replicates": 100001})"), "bootstrap.replicates",
     "expected an integer from 1 to 100000, found 100001"},
    {"BootstrapReplicatesNegative", With("bootstrap", R"({"replicates": -1})"), "bootstrap.replicates",
     "expected an integer from 1 to 100000, found -1"},
    {"BootstrapReplicatesFraction", With("bootstrap", R"({"replicates": 2.5})"), "bootstrap.replicates",
     "expected an integer from 1 to 100000, found 2.5"},
    {"BootstrapSeedText", With("bootstrap", R"({"seed": "eleven"})"), "bootstrap.seed",
     R"(found "eleven")"},
    {"BootstrapSeedTwoToThe64", With("bootstrap", R"({"seed": 18446744073709551616})"), "bootstrap.seed",
     "expected an integer from 0 to 18446744073709551615"},
    {"MaxLevelsOne", With("max_levels", "1"), "max_levels", "expected an integer >= 2, found 1"},
    {"MaxLevelsFraction", With("max_levels", "2.5"), "max_levels", "found 2.5"},
    {"SeedNegative", With("seed", "-5"), "seed", "expected an integer from 0 to 18446744073709551615 (2^64 - 1), found -5"},
    {"SeedFraction", With("seed", "1.5"), "seed", "found 1.5"},
    {"MissingNotStrings", With("missing", R"(["", 0])"), "missing[1]", "expected a string, found 0"},
    {"UnknownTopKey", With("respnse", R"("price")"), "respnse", "unknown key"},
    {"DuplicateKey", R"({"response": "price", "response": "cost", "terms": "all"})", "response",
     "duplicate key"},
    {"DuplicateKeyInTerm",
     R"({"response": "price", "terms": [{"name": "a", "column": "a"}, {"name": "b", "name": "c", "column": "b"}]})",
     "terms[1].name", "duplicate key"},
    {"TopLevelArray", "[1, 2]", "", "expected a JSON object at the top level, found [1,2]"},
};

INSTANTIATE_TEST_SUITE_P(Errors, PlanFileErrorTest, ::testing::ValuesIn(kErrorCases),
                         [](const auto& info) { return info.param.label; });

TEST(PlanFileTest, ReadsEveryKeyOfTheContractExample) {
  const LoadedPlan loaded = ParsePlanText(kContractPlan);
  const Plan& plan = loaded.plan;
  EXPECT_EQ(loaded.verbatim, kContractPlan);
  EXPECT_EQ(loaded.json.at("seed"), 20261201);
  EXPECT_EQ(plan.design.response, "resale_price");
  EXPECT_EQ(plan.design.response_transform, ResponseTransform::kLog);
  EXPECT_TRUE(plan.design.intercept);
  EXPECT_EQ(plan.design.weights, "units");
  ASSERT_EQ(plan.design.terms.size(), 5u);
  EXPECT_EQ(plan.design.terms[0].kind, TermKind::kNumeric);
  EXPECT_EQ(plan.design.terms[0].column, "age_months");
  EXPECT_EQ(plan.design.terms[1].kind, TermKind::kPower);
  EXPECT_EQ(plan.design.terms[1].degree, 2);
  EXPECT_EQ(plan.design.terms[1].key_path, "terms[1]");
  EXPECT_EQ(plan.design.terms[2].kind, TermKind::kLog);
  EXPECT_EQ(plan.design.terms[2].column, "disk_gb");
  EXPECT_EQ(plan.design.terms[3].kind, TermKind::kCategorical);
  EXPECT_EQ(plan.design.terms[3].baseline, "C");
  EXPECT_EQ(plan.design.terms[4].kind, TermKind::kProduct);
  EXPECT_EQ(plan.design.terms[4].parts, (std::vector<std::string>{"age", "grade"}));
  EXPECT_EQ(plan.search.keep, (std::vector<std::string>{"age"}));
  EXPECT_EQ(plan.search.never, (std::vector<std::string>{"log_disk"}));
  EXPECT_EQ(plan.search.method, Method::kStepwise);
  EXPECT_EQ(plan.search.criterion, Criterion::kBic);
  EXPECT_EQ(plan.search.entry_p, 0.05);
  EXPECT_EQ(plan.search.exit_p, 0.10);
  EXPECT_TRUE(plan.search.hierarchy);
  EXPECT_EQ(plan.search.max_terms, 15u);
  EXPECT_EQ(plan.search.best_per_size, 3u);
  EXPECT_EQ(plan.search.folds, 10);
  EXPECT_EQ(plan.search.seed, 20261201u);
  EXPECT_EQ(plan.missing_tokens, (std::vector<std::string>{"", "NA"}));
}

TEST(PlanFileTest, DefaultsOfAMinimalPlan) {
  const Plan plan = ParsePlanText(R"({"response": "price", "terms": "all"})").plan;
  const Plan defaults = MakeQuickPlan("price");
  EXPECT_EQ(plan, defaults);
  EXPECT_TRUE(plan.design.all_terms);
  EXPECT_EQ(plan.design.response_transform, ResponseTransform::kNone);
  EXPECT_TRUE(plan.design.intercept);
  EXPECT_FALSE(plan.design.weights);
  EXPECT_EQ(plan.search.method, Method::kStepwise);
  EXPECT_EQ(plan.search.criterion, Criterion::kBic);
  EXPECT_FALSE(plan.search.max_terms);
  // README "The plan file": folds 10, seed 1, no holdout, no bootstrap (common practice: ten
  // folds; the seeds are the tool's own choice).
  EXPECT_EQ(plan.search.folds, 10);
  EXPECT_EQ(plan.search.seed, 1u);
  EXPECT_FALSE(plan.search.holdout);
  EXPECT_FALSE(plan.search.bootstrap);
  EXPECT_EQ(plan.design.max_levels, 100u);  // README: default 100 (common practice)
  EXPECT_EQ(plan.search.subset_tolerance, 0.0);  // an exact all-subsets search unless asked
  EXPECT_EQ(ParsePlanText(R"({"response": "price", "terms": "all", "subset_tolerance": 0.005})")
                .plan.search.subset_tolerance,
            0.005);
  EXPECT_EQ(ParsePlanText(R"({"response": "price", "terms": "all", "max_levels": 500})").plan.design.max_levels,
            500u);
}

TEST(PlanFileTest, LargeSeedsAndNullsAreAccepted) {
  const Plan plan = ParsePlanText(
      R"({"response": "y", "terms": "all", "seed": 18446744073709551615, "weights": null,
          "max_terms": null, "method": "forward", "entry_p": 0.2, "exit_p": 0.1})").plan;
  EXPECT_EQ(plan.search.seed, 18446744073709551615ull);
  EXPECT_FALSE(plan.design.weights);
  EXPECT_FALSE(plan.search.max_terms);
  // entry_p above exit_p is refused for stepwise only.
  EXPECT_EQ(plan.search.entry_p, 0.2);
}

TEST(PlanFileTest, NormalisedPlanRoundTrips) {
  const Plan plan = ParsePlanText(kContractPlan).plan;
  const json normalised = PlanToJson(plan);
  EXPECT_EQ(PlanFromJson(normalised), plan);
  // Through text too, and every key is present.
  EXPECT_EQ(ParsePlanText(normalised.dump(2)).plan, plan);
  for (const char* key : {"response", "response_transform", "intercept", "weights", "terms", "keep",
                          "never", "method", "criterion", "entry_p", "exit_p", "hierarchy",
                          "max_terms", "best_per_size", "subset_tolerance", "folds", "seed", "holdout",
                          "bootstrap", "missing", "max_levels"}) {
    EXPECT_TRUE(normalised.contains(key)) << key;
  }
  const Plan quick = MakeQuickPlan("price");
  const json quick_json = PlanToJson(quick);
  EXPECT_EQ(quick_json.at("terms"), "all");
  EXPECT_TRUE(quick_json.at("weights").is_null());
  EXPECT_TRUE(quick_json.at("max_terms").is_null());
  EXPECT_TRUE(quick_json.at("holdout").is_null());
  EXPECT_TRUE(quick_json.at("bootstrap").is_null());
  EXPECT_EQ(quick_json.at("folds"), 10);
  EXPECT_EQ(quick_json.at("seed"), 1u);
  EXPECT_EQ(PlanFromJson(quick_json), quick);
}

// The validation keys: every edge of each range is accepted, a key left out of holdout or
// bootstrap takes its default, and the normalised form writes both keys of each object.
TEST(PlanFileValidationKeys, AcceptsTheEdgesOfEveryRange) {
  const auto read = [](const std::string& key, const std::string& value) {
    return ParsePlanText(With(key, value)).plan.search;
  };
  EXPECT_EQ(read("folds", "2").folds, 2);
  EXPECT_EQ(read("folds", "100").folds, 100);
  EXPECT_EQ(read("seed", "0").seed, 0u);
  EXPECT_EQ(read("seed", "-0").seed, 0u);  // JSON's -0 is the integer 0
  // 2^64 - 1 read exactly: not through a double (which would give 2^64).
  EXPECT_EQ(read("seed", "18446744073709551615").seed, 18446744073709551615ull);
  EXPECT_EQ(read("seed", "18446744073709551614").seed, 18446744073709551614ull);
  // 2^53 + 1, the first integer a double cannot hold.
  EXPECT_EQ(read("seed", "9007199254740993").seed, 9007199254740993ull);
  EXPECT_EQ(read("holdout", R"({"fraction": 5e-324})").holdout->fraction, 5e-324);  // the least double
  EXPECT_EQ(read("holdout", R"({"fraction": 0.9999999999999999})").holdout->fraction, 0.9999999999999999);
  EXPECT_EQ(read("holdout", R"({"seed": 18446744073709551615})").holdout->seed, 18446744073709551615ull);
  EXPECT_EQ(read("bootstrap", R"({"replicates": 1})").bootstrap->replicates, 1u);
  EXPECT_EQ(read("bootstrap", R"({"replicates": 100000})").bootstrap->replicates, 100000u);
  EXPECT_EQ(read("bootstrap", R"({"seed": 0})").bootstrap->seed, 0u);
}

TEST(PlanFileValidationKeys, KeysLeftOutOfTheObjectsTakeTheirDefaults) {
  const SearchOptions empty_objects = ParsePlanText(With("holdout", "{}")).plan.search;
  ASSERT_TRUE(empty_objects.holdout);
  EXPECT_EQ(empty_objects.holdout->fraction, 0.2);  // README: default fraction 0.2
  EXPECT_EQ(empty_objects.holdout->seed, 7u);       // README: default seed 7
  EXPECT_FALSE(empty_objects.bootstrap);
  const SearchOptions fraction_only = ParsePlanText(With("holdout", R"({"fraction": 0.3})")).plan.search;
  EXPECT_EQ(fraction_only.holdout, (HoldoutSettings{0.3, 7}));
  const SearchOptions seed_only = ParsePlanText(With("holdout", R"({"seed": 99})")).plan.search;
  EXPECT_EQ(seed_only.holdout, (HoldoutSettings{0.2, 99}));

  const SearchOptions bootstrap = ParsePlanText(With("bootstrap", "{}")).plan.search;
  ASSERT_TRUE(bootstrap.bootstrap);
  EXPECT_EQ(bootstrap.bootstrap->replicates, 200u);  // README: default 200 replicates
  EXPECT_EQ(bootstrap.bootstrap->seed, 11u);         // README: default seed 11
  EXPECT_EQ(ParsePlanText(With("bootstrap", R"({"replicates": 50})")).plan.search.bootstrap,
            (BootstrapSettings{50, 11}));
  // null is "none", as the normalised plan writes it.
  EXPECT_FALSE(ParsePlanText(With("holdout", "null")).plan.search.holdout);
  EXPECT_FALSE(ParsePlanText(With("bootstrap", "null")).plan.search.bootstrap);
}

TEST(PlanFileValidationKeys, TheNormalisedPlanWritesThemAndRoundTrips) {
  const std::string text = R"({"response": "price", "terms": "all", "folds": 5,
      "seed": 18446744073709551615, "holdout": {"fraction": 0.25},
      "bootstrap": {"seed": 12345678901234567890}})";
  const Plan plan = ParsePlanText(text).plan;
  const json normalised = PlanToJson(plan);
  EXPECT_EQ(normalised.at("folds"), 5);
  EXPECT_TRUE(normalised.at("seed").is_number_unsigned());
  EXPECT_EQ(normalised.at("seed").get<std::uint64_t>(), 18446744073709551615ull);
  EXPECT_EQ(normalised.at("holdout"), json::parse(R"({"fraction": 0.25, "seed": 7})"));
  EXPECT_EQ(normalised.at("bootstrap"), json::parse(R"({"replicates": 200, "seed": 12345678901234567890})"));
  EXPECT_EQ(normalised.at("bootstrap").at("seed").get<std::uint64_t>(), 12345678901234567890ull);
  // The digits survive text: dump writes 18446744073709551615, not 1.8446744073709552e19.
  EXPECT_NE(normalised.dump().find("\"seed\":18446744073709551615"), std::string::npos) << normalised.dump();
  EXPECT_EQ(PlanFromJson(normalised), plan);
  EXPECT_EQ(ParsePlanText(normalised.dump(2)).plan, plan);
  // A plan without them writes null and reads back as none.
  const json plain = PlanToJson(ParsePlanText(R"({"response": "price", "terms": "all"})").plan);
  EXPECT_TRUE(plain.at("holdout").is_null());
  EXPECT_TRUE(plain.at("bootstrap").is_null());
  EXPECT_EQ(plain.at("seed"), 1u);
}

// The reader checks types; the ranges are ValidateSearchSettings' alone, so settings made in
// code (the command line, a replay) meet the same rule with the same words.
TEST(PlanFileValidationKeys, TheRangesAreTheSearchsRule) {
  const auto message = [](const SearchOptions& options) -> std::string {
    try {
      ValidateSearchSettings(options);
    } catch (const PlanError& error) {
      return error.key_path() + ": " + error.what();
    }
    return "accepted";
  };
  SearchOptions options;
  EXPECT_EQ(message(options), "accepted");
  options.folds = 101;
  EXPECT_EQ(message(options), "folds: plan key 'folds': expected an integer from 2 to 100, found 101");
  options.folds = 2;
  options.holdout = HoldoutSettings{1.0, 7};
  EXPECT_EQ(message(options),
            "holdout.fraction: plan key 'holdout.fraction': expected a number strictly between 0 and 1, found 1");
  options.holdout = HoldoutSettings{};
  options.bootstrap = BootstrapSettings{0, 11};
  EXPECT_EQ(message(options),
            "bootstrap.replicates: plan key 'bootstrap.replicates': expected an integer from 1 to 100000, found 0");
  options.bootstrap = BootstrapSettings{kMaxReplicates + 1, 11};
  EXPECT_NE(message(options).find("found 100001"), std::string::npos);
  options.bootstrap = BootstrapSettings{};
  EXPECT_EQ(message(options), "accepted");
}

class PlanWithDataTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = folder_.Write("laptops.csv",
                          "price,age,grade,colour\n"
                          "100,10,A,red\n"
                          "200,20,B,blue\n"
                          "150,30,A,blue\n"
                          "120,25,C,red\n");
    profile_ = ProfileCsv(path_, CsvOptions{});
  }
  TempDir folder_;
  std::filesystem::path path_;
  DataProfile profile_;
};

TEST_F(PlanWithDataTest, NormalisedPlanNamesChosenBaselinesAndResolvedTerms) {
  const Plan quick = MakeQuickPlan("price");
  const Design design = BuildDesign(quick.design, profile_);
  const json normalised = PlanToJson(quick, &design);
  // Common practice: the default baseline is the most frequent level (A twice); colour ties
  // (red, blue twice each) go to the byte-wise smallest, blue.
  const json expected_terms = json::parse(R"([
      {"name": "age", "column": "age"},
      {"name": "grade", "categorical": "grade", "baseline": "A"},
      {"name": "colour", "categorical": "colour", "baseline": "blue"}])");
  EXPECT_EQ(normalised.at("terms"), expected_terms);
  // The resolved plan builds the same design.
  const Plan resolved = PlanFromJson(normalised);
  EXPECT_FALSE(resolved.design.all_terms);
  const Design rebuilt = BuildDesign(resolved.design, profile_);
  ASSERT_EQ(rebuilt.column_count(), design.column_count());
  for (std::size_t c = 0; c < design.column_count(); ++c) {
    EXPECT_EQ(rebuilt.columns[c].name, design.columns[c].name);
  }
  EXPECT_EQ(PlanToJson(resolved, &rebuilt), normalised);
}

TEST_F(PlanWithDataTest, ProductsAndPowersSurviveNormalisation) {
  const Plan plan = ParsePlanText(R"({"response": "price", "terms": [
      {"name": "age", "column": "age"}, {"name": "age^2", "power": {"column": "age", "degree": 2}},
      {"name": "grade", "categorical": "grade"}, {"name": "age:grade", "product": ["age", "grade"]}]})")
                        .plan;
  const Design design = BuildDesign(plan.design, profile_);
  const Plan resolved = PlanFromJson(PlanToJson(plan, &design));
  Plan expected = plan;
  expected.design.terms[2].baseline = "A";
  EXPECT_EQ(resolved, expected);
}

TEST_F(PlanWithDataTest, KeepAndNeverAreCheckedAgainstTheDesign) {
  Plan plan = MakeQuickPlan("price");
  plan.search.keep = {"age"};
  plan.search.never = {"colour", "postcode"};
  const Design design = BuildDesign(plan.design, profile_);
  try {
    ValidateSearchOptions(plan.search, design);
    ADD_FAILURE() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "never[1]");
    EXPECT_NE(std::string(error.what()).find("no term named 'postcode'"), std::string::npos);
  }
  plan.search.never = {"colour"};
  EXPECT_NO_THROW(ValidateSearchOptions(plan.search, design));
  // With "all", keep and never cannot be checked before the data are seen.
  EXPECT_NO_THROW(ParsePlanText(R"({"response": "price", "terms": "all", "keep": ["anything"]})"));
}

TEST(PlanFileTest, MalformedJsonNamesLineAndColumn) {
  // After the stray comma a key is expected; the error is at the '}' that comes instead (4:1).
  const std::string text = "{\n  \"response\": \"price\",\n  \"terms\": \"all\",\n}";
  const PlanError error = ParseError(text);
  EXPECT_EQ(error.key_path(), "");
  EXPECT_NE(std::string(error.what()).find("p.json:4:1: malformed JSON"), std::string::npos)
      << error.what();
  const PlanError second = ParseError("{\"response\": \"price\", \"terms\": [1 2]}");
  EXPECT_NE(std::string(second.what()).find("p.json:1:35: malformed JSON"), std::string::npos)
      << second.what();
  const PlanError empty = ParseError("");
  EXPECT_NE(std::string(empty.what()).find("p.json:1:1: malformed JSON"), std::string::npos)
      << empty.what();
}

TEST(PlanFileTest, FileErrorsNameTheFile) {
  TempDir folder;
  try {
    LoadPlanFile(folder.path() / "absent.json");
    ADD_FAILURE() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_NE(std::string(error.what()).find("cannot open plan file '" +
                                             (folder.path() / "absent.json").string() + "'"),
              std::string::npos)
        << error.what();
    EXPECT_NE(std::string(error.what()).find("No such file"), std::string::npos) << error.what();
  }
  const auto path = folder.Write("plan.json", kContractPlan);
  const LoadedPlan loaded = LoadPlanFile(path);
  EXPECT_EQ(loaded.verbatim, kContractPlan);
  EXPECT_EQ(loaded.plan.design.response, "resale_price");
  const auto broken = folder.Write("broken.json", "{\"response\": }");
  try {
    LoadPlanFile(broken);
    ADD_FAILURE() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_NE(std::string(error.what()).find(broken.string() + ":1:14"), std::string::npos)
        << error.what();
  }
}

// ---- limits (engine/limits.h) ----

// A plan of `count` numeric terms named t0, t1, ...; `last` replaces the final term's text.
std::string PlanOfTerms(std::size_t count, const std::string& last = "") {
  std::string text = R"({"response": "price", "terms": [)";
  for (std::size_t i = 0; i < count; ++i) {
    if (i > 0) text += ", ";
    text += i + 1 == count && !last.empty() ? last : R"({"name": "t)" + std::to_string(i) + R"(", "column": "x"})";
  }
  return text + "]}";
}

TEST(PlanFileLimits, TermsListLongerThanTheLimitIsRefusedBeforeAnyTermIsRead) {
  InputLimits limits;
  limits.terms = 3;
  EXPECT_EQ(ParsePlanText(PlanOfTerms(3), "p.json", limits).plan.design.terms.size(), 3u);
  // The fourth term is malformed, and is never read: the count comes first.
  const LimitError error = LimitErrorOf([&] { ParsePlanText(PlanOfTerms(4, "17"), "p.json", limits); });
  EXPECT_EQ(error.limit(), LimitKind::kTerms);
  EXPECT_STREQ(error.what(), "plan key 'terms': the plan lists 4 terms; the terms limit is 3");
  // The default (2,000) holds a 20,000-term plan off (the kind that took gigabytes).
  EXPECT_EQ(LimitErrorOf([&] { ParsePlanText(PlanOfTerms(20'000), "p.json"); }).value(), 2000u);
}

TEST(PlanFileLimits, PlanTextLargerThanThePlanBytesLimitIsRefused) {
  InputLimits limits;
  limits.plan_bytes = 100;
  const std::string text = PlanOfTerms(10);
  ASSERT_GT(text.size(), 100u);
  const LimitError error = LimitErrorOf([&] { ParsePlanText(text, "p.json", limits); });
  EXPECT_EQ(error.limit(), LimitKind::kPlanBytes);
  EXPECT_EQ(std::string(error.what()),
            "p.json: the plan holds " + FormatCount(static_cast<std::int64_t>(text.size())) +
                " bytes; the plan-bytes limit is 100");
}

TEST(PlanFileLimits, PlanFileLargerThanTheLimitIsRefusedBeforeItIsRead) {
  TempDir folder;
  InputLimits limits;
  limits.plan_bytes = 1000;
  const auto small = folder.Write("small.json", PlanOfTerms(2));
  EXPECT_EQ(LoadPlanFile(small, limits).plan.design.terms.size(), 2u);
  const auto big = folder.Write("big.json", PlanOfTerms(200));
  const LimitError error = LimitErrorOf([&] { LoadPlanFile(big, limits); });
  EXPECT_EQ(std::string(error.what()),
            "plan file '" + big.string() + "': it holds " +
                FormatCount(static_cast<std::int64_t>(std::filesystem::file_size(big))) +
                " bytes; the plan-bytes limit is 1,000");
  // A FIFO has no size: it is read up to the limit and refused past it, never held whole.
  const auto fifo = folder.path() / "plan.fifo";
  ASSERT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
  std::signal(SIGPIPE, SIG_IGN);  // the reader stops early: the writer's last writes fail, quietly
  std::thread writer([&] {
    std::ofstream out(fifo);
    out << std::string(1 << 20, ' ');  // 1 MiB of spaces: more than the limit
  });
  const LimitError from_fifo = LimitErrorOf([&] { LoadPlanFile(fifo, limits); });
  writer.join();
  EXPECT_NE(std::string(from_fifo.what()).find("it holds more than 1,000 bytes"), std::string::npos)
      << from_fifo.what();
}

TEST(PlanFileLimits, LongKeepAndNeverListsCostNoQuadraticTime) {
  // 100,000 distinct keep names with "terms": "all" (checked against the data later): the
  // duplicate checks are lookups, not pairwise comparisons (5e9 of them).
  std::string keep;
  for (int i = 0; i < 100'000; ++i) keep += std::string(i == 0 ? "" : ", ") + "\"k" + std::to_string(i) + "\"";
  const std::string text = R"({"response": "price", "terms": "all", "keep": [)" + keep + R"(], "never": [)" +
                           keep + "]}";
  const auto started = std::chrono::steady_clock::now();
  const PlanError error = ParseError(text);
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count(), 3.0);
  EXPECT_EQ(error.key_path(), "never[0]");
  EXPECT_NE(std::string(error.what()).find("also in keep[0]"), std::string::npos) << error.what();
}

}  // namespace
}  // namespace stepledger

namespace stepledger {
namespace {

// One rule for the thresholds, the search's own: the plan file, the command line and a replay
// agree. entry_p above exit_p only matters where the thresholds decide the route (stepwise by
// partial F); with BIC they are unused and the plan is accepted everywhere.
TEST(PlanFileThresholds, TheSearchsRuleIsTheOnlyRule) {
  const std::string bic = R"({"response": "price", "terms": [{"name": "age", "column": "age"}],
      "method": "stepwise", "criterion": "bic", "entry_p": 0.2, "exit_p": 0.1})";
  const Plan accepted = ParsePlanText(bic).plan;
  EXPECT_NO_THROW(ValidateSearchSettings(accepted.search));

  std::string partial_f = bic;
  partial_f.replace(partial_f.find("\"bic\""), 5, "\"partial-f\"");
  try {
    ParsePlanText(partial_f);
    ADD_FAILURE() << "expected a PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "entry_p");
  }
  Plan refused = accepted;
  refused.search.criterion = Criterion::kPartialF;
  EXPECT_THROW(ValidateSearchSettings(refused.search), PlanError);
}

}  // namespace
}  // namespace stepledger

// Every plan under examples/plans runs through `select` on the bundled demo data and finds the
// demo's true model (invented data whose true model is known: examples/laptop_listings.h).
//
// What each plan must find (measured on the bundled data, and what the criteria imply):
//  - exactly the true terms: aic, aicc, bic and cp with every method, and partial-f with
//    forward and stepwise (entry at p < 0.05);
//  - at least the true terms: adj-r2 with every method (adjusted R-squared rewards any term
//    whose F exceeds 1, so the six-column weekday term with no signal enters too: common
//    practice that adj-r2 over-selects), partial-f with backward and all-subsets (a term stays
//    while its p is below exit_p = 0.10, a looser bar than entry), and any plan not listed;
//  - every candidate term: the "none" plan (no search; it fits every term).

#include <gtest/gtest.h>

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "../../examples/laptop_listings.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::RunStepledger;

enum class Expect { kExactlyTrueTerms, kAtLeastTrueTerms, kEveryCandidate };

std::vector<std::string> PlanFileNames() {
  std::vector<std::string> names;
  const fs::path folder = testing::SourceDir() / "examples/plans";
  if (!fs::is_directory(folder)) return names;
  for (const fs::directory_entry& entry : fs::directory_iterator(folder)) {
    if (entry.path().extension() == ".json") names.push_back(entry.path().filename().string());
  }
  std::sort(names.begin(), names.end());
  return names;
}

Expect ExpectationFor(const std::string& file_name) {
  static const std::set<std::string> kExact = {
      "forward_aic.json",      "forward_aicc.json",      "forward_bic.json",
      "forward_cp.json",       "forward_partial-f.json", "backward_aic.json",
      "backward_aicc.json",    "backward_bic.json",      "backward_cp.json",
      "stepwise_aic.json",     "stepwise_aicc.json",     "stepwise_bic.json",
      "stepwise_cp.json",      "stepwise_partial-f.json", "all-subsets_aic.json",
      "all-subsets_aicc.json", "all-subsets_bic.json",   "all-subsets_cp.json",
      "forward_cv.json",       "backward_cv.json",       "stepwise_cv.json",
      "all-subsets_cv.json"};
  if (file_name == "none.json") return Expect::kEveryCandidate;
  return kExact.count(file_name) ? Expect::kExactlyTrueTerms : Expect::kAtLeastTrueTerms;
}

std::set<std::string> TrueTerms() {
  return {std::begin(examples::kLaptopTrueTerms), std::end(examples::kLaptopTrueTerms)};
}

std::string Readable(std::string name) {
  for (char& c : name) {
    if (!std::isalnum(static_cast<unsigned char>(c))) c = '_';
  }
  return name;
}

class ExamplePlan : public ::testing::TestWithParam<std::string> {};

TEST_P(ExamplePlan, SelectsOnTheDemoData) {
  const fs::path plan = testing::SourceDir() / "examples/plans" / GetParam();
  const fs::path data = testing::SourceDir() / "examples/data/laptops.csv";
  testing::TempDir dir;
  const auto run = RunStepledger(
      {"select", data.string(), "--plan", plan.string(), "--out", dir.path().string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const json result = json::parse(run.out);
  std::set<std::string> terms;
  for (const json& term : result.at("model").at("terms")) terms.insert(term.get<std::string>());
  EXPECT_TRUE(fs::exists(dir.path() / "audit.json"));

  const std::set<std::string> truth = TrueTerms();
  switch (ExpectationFor(GetParam())) {
    case Expect::kExactlyTrueTerms:
      EXPECT_EQ(terms, truth);
      break;
    case Expect::kAtLeastTrueTerms:
      EXPECT_TRUE(std::includes(terms.begin(), terms.end(), truth.begin(), truth.end()))
          << "a true term is missing";
      break;
    case Expect::kEveryCandidate: {
      std::set<std::string> candidates;
      const json plan_json = json::parse(std::ifstream(plan));
      for (const json& term : plan_json.at("terms")) candidates.insert(term.at("name").get<std::string>());
      EXPECT_EQ(terms, candidates);
      break;
    }
  }
}

INSTANTIATE_TEST_SUITE_P(EveryBundledPlan, ExamplePlan, ::testing::ValuesIn(PlanFileNames()),
                         [](const ::testing::TestParamInfo<std::string>& info) {
                           return Readable(info.param);
                         });

// The folder holds one plan per method and criterion, so that none goes missing unnoticed.
TEST(ExamplePlans, CoverEveryMethodAndCriterion) {
  const std::vector<std::string> names = PlanFileNames();
  const std::set<std::string> present(names.begin(), names.end());
  for (const char* method : {"forward", "backward", "stepwise", "all-subsets"}) {
    for (const char* criterion : {"adj-r2", "aic", "aicc", "bic", "cp", "partial-f", "cv"}) {
      const std::string name = std::string(method) + "_" + criterion + ".json";
      EXPECT_TRUE(present.count(name)) << name;
    }
  }
  EXPECT_TRUE(present.count("none.json"));
}

}  // namespace
}  // namespace stepledger

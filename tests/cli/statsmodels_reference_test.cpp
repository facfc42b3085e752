// End to end against Debian python3-statsmodels 0.13 WLS: random weighted designs with a log
// term, a categorical term and a product, written to CSV with a fixed seed, fitted by
// `stepledger fit --json` in-process and by statsmodels' WLS on the same file with the design
// built by hand in numpy (tests/cli/statsmodels_wls.py). Coefficients, standard errors, the
// log-likelihood (both include the 1/2 sum ln w term) and R^2 (weighted, about the weighted
// mean) must agree to 1e-9 relative. Skips when statsmodels cannot be imported.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <random>
#include <sstream>
#include <ostream>
#include <string>

#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

constexpr const char* kSource = "Debian python3-statsmodels 0.13 WLS";
constexpr double kRelativeTolerance = 1e-9;

struct DesignCase {
  const char* name;
  std::uint64_t seed;
  int rows;
  double noise_sd;
};

const DesignCase kCases[] = {
    {"Small", 11, 40, 0.5},
    {"Medium", 2024, 250, 2.0},
    {"LargeNoisy", 777, 1200, 10.0},
};

std::string Number(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

// True model (invented for the simulation): y = 1.5 + 2 x1 - 0.7 x2 + 3 ln x3 + 1 (g=b) - 2 (g=c)
// + 0.5 x1 (g=b) - 1 x1 (g=c) + e / sqrt(w), where (g=b) is 1 on level b of g and 0 elsewhere.
std::string MakeCsv(const DesignCase& design) {
  testing::TestRandom random(design.seed);
  std::ostringstream csv;
  csv << "x1,x2,x3,g,w,y\n";
  for (int row = 0; row < design.rows; ++row) {
    const double x1 = 3.0 * random.Normal() + 10.0;
    const double x2 = random.Uniform(-5, 5);
    const double x3 = random.Uniform(0.5, 20);
    const char level = "abc"[static_cast<int>(random.Uniform(0, 3))];
    const double w = random.Uniform(0.2, 3.0);
    const double b = level == 'b' ? 1 : 0, c = level == 'c' ? 1 : 0;
    const double y = 1.5 + 2 * x1 - 0.7 * x2 + 3 * std::log(x3) + b - 2 * c + 0.5 * x1 * b -
                     x1 * c + design.noise_sd * random.Normal() / std::sqrt(w);
    csv << Number(x1) << "," << Number(x2) << "," << Number(x3) << "," << level << ","
        << Number(w) << "," << Number(y) << "\n";
  }
  return csv.str();
}

constexpr const char* kPlan = R"({
  "response": "y",
  "weights": "w",
  "terms": [
    {"name": "x1", "column": "x1"},
    {"name": "x2", "column": "x2"},
    {"name": "lx3", "log": "x3"},
    {"name": "g", "categorical": "g", "baseline": "a"},
    {"name": "x1:g", "product": ["x1", "g"]}
  ]
})";

void ExpectRelativelyNear(double computed, double reference, const std::string& what) {
  const double scale = std::max(std::abs(reference), 1e-300);
  EXPECT_LE(std::abs(computed - reference) / scale, kRelativeTolerance)
      << what << ": stepledger " << Number(computed) << " vs " << kSource << " "
      << Number(reference);
}

// Names the case in gtest messages instead of its bytes.
void PrintTo(const DesignCase& value, std::ostream* out) { *out << value.name; }

class StatsmodelsReference : public ::testing::TestWithParam<DesignCase> {};

TEST_P(StatsmodelsReference, FitJsonAgreesWithWls) {
  if (!testing::PythonHasModules("numpy,statsmodels")) {
    GTEST_SKIP() << testing::ReferencePython() << " cannot import statsmodels; " << kSource
                 << " reference not available";
  }
  const DesignCase& design = GetParam();
  testing::TempDir scratch;
  const auto csv = scratch.Write("data.csv", MakeCsv(design));
  const auto plan = scratch.Write("plan.json", kPlan);

  const testing::CliRun run = testing::RunStepledger({"fit", csv.string(), "--plan", plan.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json model = nlohmann::json::parse(run.out);

  const std::string script = (testing::SourceDir() / "tests/cli/statsmodels_wls.py").string();
  std::string reference_text;
  ASSERT_EQ(testing::RunCommand("'" + testing::ReferencePython() + "' '" + script + "' '" +
                                    csv.string() + "'",
                                &reference_text),
            0)
      << "the reference script failed";
  const nlohmann::json reference = nlohmann::json::parse(reference_text);

  const auto& coefficients = model["coefficients"];
  ASSERT_EQ(coefficients.size(), reference["names"].size());
  for (std::size_t j = 0; j < coefficients.size(); ++j) {
    const std::string name = reference["names"][j];
    ASSERT_EQ(coefficients[j]["name"], name) << "column order";
    ExpectRelativelyNear(coefficients[j]["estimate"].get<double>(), reference["params"][j], name + " estimate");
    ExpectRelativelyNear(coefficients[j]["se"].get<double>(), reference["bse"][j], name + " SE");
  }
  ExpectRelativelyNear(model["log_likelihood"].get<double>(), reference["llf"], "log-likelihood");
  ExpectRelativelyNear(model["r2"].get<double>(), reference["rsquared"], "R-squared");
  ExpectRelativelyNear(model["rss"].get<double>(), reference["ssr"], "weighted RSS");
  EXPECT_EQ(model["df_residual"].get<double>(), reference["df_resid"].get<double>());
}

INSTANTIATE_TEST_SUITE_P(RandomDesigns, StatsmodelsReference, ::testing::ValuesIn(kCases),
                         [](const ::testing::TestParamInfo<DesignCase>& info) {
                           return std::string(info.param.name);
                         });

}  // namespace
}  // namespace stepledger

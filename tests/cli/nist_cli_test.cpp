// End to end against NIST StRD certified values (NIST Statistical Reference Datasets, linear
// least squares, certified in 500-digit arithmetic): each .dat file is written to a CSV, its
// model to a plan (polynomials as power terms), and `stepledger fit --json` runs in-process.
// Skips when the reference folder is absent.
//
// Required digits (log relative error, capped at 15): coefficients 9 everywhere; their
// standard deviations 9 (Filip 8); R^2 and the residual SD 9. Where NIST certifies an exact 0
// (Wampler1/2: standard deviations and residual SD of an exact fit) the digits are those of
// the computed value relative to the size it is a deviation of: the estimate for a standard
// deviation, the root mean square of y for the residual SD.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <map>
#include <sstream>
#include <ostream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/nist.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::LogRelativeError;
using testing::NistDataset;

struct NistCase {
  const char* name;
  int degree;          ///< polynomial degree in x; 0: the data's predictors as they are
  bool intercept;
  double sd_digits;    ///< required digits of the coefficient standard deviations
};

const NistCase kCases[] = {
    {"Norris", 1, true, 9},   {"Pontius", 2, true, 9},  {"NoInt1", 1, false, 9},
    {"NoInt2", 1, false, 9},  {"Filip", 10, true, 8},   {"Longley", 0, true, 9},
    {"Wampler1", 5, true, 9}, {"Wampler2", 5, true, 9}, {"Wampler3", 5, true, 9},
    {"Wampler4", 5, true, 9}, {"Wampler5", 5, true, 9},
};

struct DigitsRow {
  double coefficients = 15, standard_deviations = 15, r_squared = 15, residual_sd = 15;
};

// Rows of the digits table, printed once all datasets have run.
std::map<std::string, DigitsRow>& DigitsTable() {
  static std::map<std::string, DigitsRow> table;
  return table;
}

class DigitsTablePrinter : public ::testing::Environment {
 public:
  void TearDown() override {
    if (DigitsTable().empty()) return;
    std::cout << "\nDigits of agreement with NIST StRD certified values (stepledger fit --json)\n"
              << "| data set | coefficients | standard deviations | R-squared | residual SD |\n"
              << "| --- | --- | --- | --- | --- |\n";
    for (const NistCase& nist_case : kCases) {
      const auto found = DigitsTable().find(nist_case.name);
      if (found == DigitsTable().end()) continue;
      const DigitsRow& row = found->second;
      char line[160];
      std::snprintf(line, sizeof line, "| %s | %.1f | %.1f | %.1f | %.1f |\n", nist_case.name,
                    row.coefficients, row.standard_deviations, row.r_squared, row.residual_sd);
      std::cout << line;
    }
  }
};
[[maybe_unused]] ::testing::Environment* const kPrinter =
    ::testing::AddGlobalTestEnvironment(new DigitsTablePrinter);

std::string Number(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);  // round-trips every double
  return buffer;
}

std::string MakeCsv(const NistDataset& data) {
  std::ostringstream csv;
  const bool one_predictor = data.predictors.n_cols == 1;
  csv << "y";
  for (arma::uword j = 0; j < data.predictors.n_cols; ++j) {
    csv << (one_predictor ? std::string(",x") : ",x" + std::to_string(j + 1));
  }
  csv << "\n";
  for (arma::uword i = 0; i < data.y.n_elem; ++i) {
    csv << Number(data.y(i));
    for (arma::uword j = 0; j < data.predictors.n_cols; ++j) csv << "," << Number(data.predictors(i, j));
    csv << "\n";
  }
  return csv.str();
}

std::string MakePlan(const NistDataset& data, const NistCase& nist_case) {
  nlohmann::json terms = nlohmann::json::array();
  if (nist_case.degree == 0) {
    for (arma::uword j = 0; j < data.predictors.n_cols; ++j) {
      const std::string column = "x" + std::to_string(j + 1);
      terms.push_back({{"name", column}, {"column", column}});
    }
  } else {
    terms.push_back({{"name", "x"}, {"column", "x"}});
    for (int degree = 2; degree <= nist_case.degree; ++degree) {
      terms.push_back({{"name", "x^" + std::to_string(degree)},
                       {"power", {{"column", "x"}, {"degree", degree}}}});
    }
  }
  return nlohmann::json{{"response", "y"}, {"intercept", nist_case.intercept}, {"terms", terms}}.dump(2);
}

double DigitsOrScaled(double computed, double certified, double scale) {
  if (certified != 0) return LogRelativeError(computed, certified);
  return LogRelativeError(computed / scale, 0.0);
}

// Names the case in gtest messages instead of its bytes.
void PrintTo(const NistCase& value, std::ostream* out) { *out << value.name; }

class NistCli : public ::testing::TestWithParam<NistCase> {};

TEST_P(NistCli, FitJsonAgreesWithCertifiedValues) {
  const NistCase& nist_case = GetParam();
  const NistDataset data =
      testing::ReadNistDataset(testing::NistDirectory() / (std::string(nist_case.name) + ".dat"));
  testing::TempDir scratch;
  const auto csv = scratch.Write("data.csv", MakeCsv(data));
  const auto plan = scratch.Write("plan.json", MakePlan(data, nist_case));

  const testing::CliRun run = testing::RunStepledger({"fit", csv.string(), "--plan", plan.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json model = nlohmann::json::parse(run.out);
  const auto& coefficients = model["coefficients"];
  const auto& certified = data.certified;
  ASSERT_EQ(coefficients.size(), certified.estimates.size());

  const double rms_y = std::sqrt(arma::mean(arma::square(data.y)));
  DigitsRow row;
  for (std::size_t j = 0; j < certified.estimates.size(); ++j) {
    const std::string source = "NIST StRD " + std::string(nist_case.name) + ", certified B" +
                               std::to_string(j + (nist_case.intercept ? 0 : 1));
    const double estimate = coefficients[j]["estimate"].get<double>();
    const double estimate_digits = LogRelativeError(estimate, certified.estimates[j]);
    EXPECT_GE(estimate_digits, 9.0) << source << ": " << Number(estimate) << " vs "
                                    << Number(certified.estimates[j]);
    ASSERT_FALSE(coefficients[j]["se"].is_null()) << source;
    const double se = coefficients[j]["se"].get<double>();
    const double sd_digits = DigitsOrScaled(se, certified.standard_deviations[j],
                                            std::abs(certified.estimates[j]));
    EXPECT_GE(sd_digits, nist_case.sd_digits) << source << " standard deviation: " << Number(se)
                                              << " vs " << Number(certified.standard_deviations[j]);
    row.coefficients = std::min(row.coefficients, estimate_digits);
    row.standard_deviations = std::min(row.standard_deviations, sd_digits);
  }
  ASSERT_FALSE(model["r2"].is_null());
  ASSERT_FALSE(model["sigma"].is_null());
  row.r_squared = LogRelativeError(model["r2"].get<double>(), certified.r_squared);
  row.residual_sd = DigitsOrScaled(model["sigma"].get<double>(), certified.residual_sd, rms_y);
  EXPECT_GE(row.r_squared, 9.0) << "NIST StRD " << nist_case.name << ", certified R-squared";
  EXPECT_GE(row.residual_sd, 9.0) << "NIST StRD " << nist_case.name << ", certified residual SD";
  DigitsTable()[nist_case.name] = row;
}

INSTANTIATE_TEST_SUITE_P(StRD, NistCli, ::testing::ValuesIn(kCases),
                         [](const ::testing::TestParamInfo<NistCase>& info) {
                           return std::string(info.param.name);
                         });

}  // namespace
}  // namespace stepledger

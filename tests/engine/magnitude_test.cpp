// The magnitudes stepledger fits (engine/design.h, kLargestMagnitude): inside [1e-60, 1e60] a fit
// is exactly the fit of the rescaled data; outside, BuildDesign refuses the data naming the cell.
// Sources: "NIST StRD Longley, certified values" (tests/reference/nist-strd/Longley.dat), scaled
// by exact powers of two; "Debian python3-statsmodels 0.13 OLS" for a small decimal design at the
// window's edges (fitted there on the columns divided by exact powers of two, the results
// multiplied back: exact operations, so the reference does not depend on statsmodels handling
// numbers near 1e58).

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <numeric>
#include <sstream>
#include <string>
#include <vector>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/profile.h"
#include "support/nist.h"
#include "support/test_paths.h"
#include "support/term_specs.h"

namespace stepledger {
namespace {

using testing::LogRelativeError;
using testing::Numeric;
using testing::TempDir;

std::string Exact(double value) {
  char text[40];
  std::snprintf(text, sizeof text, "%.17g", value);
  return text;
}

testing::NistDataset Longley() { return testing::ReadNistDataset(testing::NistDirectory() / "Longley.dat"); }

// Longley as CSV with y multiplied by y_factor and every x by x_factor (exact when both are
// powers of two).
std::string LongleyCsv(const testing::NistDataset& data, double x_factor, double y_factor) {
  std::string text = "y,x1,x2,x3,x4,x5,x6\n";
  for (arma::uword i = 0; i < data.y.n_elem; ++i) {
    text += Exact(data.y(i) * y_factor);
    for (arma::uword j = 0; j < data.predictors.n_cols; ++j) text += "," + Exact(data.predictors(i, j) * x_factor);
    text += "\n";
  }
  return text;
}

DesignSpec LongleySpec() {
  DesignSpec spec;
  spec.response = "y";
  for (int j = 1; j <= 6; ++j) {
    spec.terms.push_back(Numeric("x" + std::to_string(j), "x" + std::to_string(j)));
    spec.terms.back().key_path = "terms[" + std::to_string(j - 1) + "]";
  }
  return spec;
}

// The whole pipeline on a file: profile, design, factor pass, refined fit of every term.
FitResult FitFile(const std::filesystem::path& path, const DesignSpec& spec) {
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
  const PassResult pass = RunFactorPass(path, design, PassOptions{});
  std::vector<std::size_t> terms(design.terms.size());
  std::iota(terms.begin(), terms.end(), std::size_t{0});
  const RowReplay replay = FileRowReplay(path, design, CsvOptions{});
  return FitModel(pass.factor, design, terms, FitOptions{}, &replay);
}

// x times 2^kx and y times 2^ky: every estimate and standard error is the unscaled one times
// 2^(ky - kx) (the intercept's 2^ky), to the last bit, and agrees with NIST's certified values
// (scaled alike) to the digits of the unscaled fit. The edges: x2 up to 554,894 times 2^180 is
// 8.9e59; y down to 60,171 times 2^-200 is 3.7e-56.
TEST(Magnitude, LongleyScaledByPowersOfTwoIsTheRescaledFitToTheLastBit) {
  const testing::NistDataset data = Longley();
  TempDir folder;
  const FitResult plain = FitFile(folder.Write("plain.csv", LongleyCsv(data, 1, 1)), LongleySpec());
  ASSERT_EQ(plain.coefficients.size(), 7u);
  for (const auto& [kx, ky] : {std::pair{180, -200}, std::pair{-190, 170}, std::pair{-150, -150}}) {
    const FitResult scaled = FitFile(
        folder.Write("scaled.csv", LongleyCsv(data, std::ldexp(1.0, kx), std::ldexp(1.0, ky))), LongleySpec());
    ASSERT_EQ(scaled.coefficients.size(), 7u);
    for (std::size_t j = 0; j < 7; ++j) {
      const int shift = j == 0 ? ky : ky - kx;
      const CoefficientEstimate& c = scaled.coefficients[j];
      EXPECT_EQ(c.estimate, std::ldexp(plain.coefficients[j].estimate, shift)) << kx << " " << ky << " " << j;
      EXPECT_EQ(*c.se, std::ldexp(*plain.coefficients[j].se, shift)) << kx << " " << ky << " " << j;
      EXPECT_EQ(*c.t, *plain.coefficients[j].t);
      // NIST StRD Longley, certified values, times the same power of two.
      EXPECT_GE(LogRelativeError(c.estimate, std::ldexp(data.certified.estimates[j], shift)), 13) << j;
      EXPECT_GE(LogRelativeError(*c.se, std::ldexp(data.certified.standard_deviations[j], shift)), 13) << j;
    }
    EXPECT_EQ(scaled.rss, std::ldexp(plain.rss, 2 * ky));
    EXPECT_EQ(*scaled.criteria.r2, *plain.criteria.r2);
    EXPECT_GE(LogRelativeError(*scaled.criteria.sigma, std::ldexp(data.certified.residual_sd, ky)), 13);
  }
}

// Before the window, data times 1e160 gave standard errors of 2.22e-162 where 2.449e-162 was right,
// and subnormal data an "estimate" with every statistic undefined, both as successes.
TEST(Magnitude, LongleyBeyondTheWindowIsRefusedNamingTheCell) {
  const testing::NistDataset data = Longley();
  TempDir folder;
  auto message = [&](double x_factor, double y_factor) {
    const auto path = folder.Write("far.csv", LongleyCsv(data, x_factor, y_factor));
    try {
      BuildDesign(LongleySpec(), ProfileCsv(path, CsvOptions{}));
    } catch (const InputError& error) {
      return std::string(error.what());
    }
    ADD_FAILURE() << "expected an InputError";
    return std::string();
  };
  // The response first: its largest value, 70,551 (1962), is on the last line, 17.
  std::string text = message(1e160, 1e160);
  EXPECT_NE(text.find("far.csv:17:1: response 'y' holds 7.0551e+164 beyond the magnitudes"), std::string::npos)
      << text;
  EXPECT_NE(text.find("divide it by 1e+164"), std::string::npos) << text;
  // The predictors alone: x1 first in the plan, largest 116.9 on line 17.
  text = message(1e160, 1);
  EXPECT_NE(text.find("far.csv:17:7: column 'x1' holds 1.169"), std::string::npos) << text;
  // Every value subnormal.
  text = message(1e-320, 1e-320);
  EXPECT_NE(text.find("response 'y' holds "), std::string::npos) << text;
  EXPECT_NE(text.find("its largest value in magnitude, below the magnitudes"), std::string::npos) << text;
  EXPECT_NE(text.find("multiply it by 1e+316"), std::string::npos) << text;
}

// A small decimal design at the window's edges: price near 1e58, a near 1e-57, b near 1e57, so
// that a's coefficient is near 1e115 and its variance near 1e230.
TEST(Magnitude, ASmallDesignAtTheEdgesMatchesStatsmodels) {
  if (!testing::PythonHasModules("numpy,statsmodels")) {
    GTEST_SKIP() << "Debian python3-statsmodels is not importable by " << testing::ReferencePython();
  }
  const std::string csv =
      "price,a,b\n"
      "3.71e58,1.3e-57,2.2e57\n"
      "4.02e58,2.9e-57,1.1e57\n"
      "5.17e58,4.1e-57,3.7e57\n"
      "4.44e58,3.3e-57,0.4e57\n"
      "6.93e58,6.2e-57,2.9e57\n"
      "5.58e58,5.0e-57,1.6e57\n"
      "7.71e58,7.7e-57,3.1e57\n"
      "6.02e58,5.5e-57,0.9e57\n";
  TempDir folder;
  const auto path = folder.Write("edges.csv", csv);
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Numeric("a", "a"), Numeric("b", "b")};
  const FitResult fit = FitFile(path, spec);
  ASSERT_EQ(fit.coefficients.size(), 3u);

  const auto script = folder.Write("reference.py",
                                   "import sys, numpy as np, statsmodels.api as sm\n"
                                   "d = np.loadtxt(sys.argv[1], delimiter=',', skiprows=1)\n"
                                   "# exact powers of two bring every column near 1\n"
                                   "k = [int(np.round(np.log2(np.abs(d[:, j]).max()))) for j in range(3)]\n"
                                   "s = [np.ldexp(1.0, -kj) for kj in k]\n"
                                   "y = d[:, 0] * s[0]\n"
                                   "X = sm.add_constant(np.column_stack([d[:, 1] * s[1], d[:, 2] * s[2]]))\n"
                                   "f = sm.OLS(y, X).fit()\n"
                                   "back = [1 / s[0], s[1] / s[0], s[2] / s[0]]\n"
                                   "for j in range(3):\n"
                                   "    print(repr(float(f.params[j] * back[j])), repr(float(f.bse[j] * back[j])))\n");
  std::string output;
  ASSERT_EQ(testing::RunCommand(testing::ReferencePython() + " '" + script.string() + "' '" + path.string() + "'", &output),
            0);
  std::istringstream values(output);
  for (std::size_t j = 0; j < 3; ++j) {
    double estimate = 0, se = 0;
    ASSERT_TRUE(values >> estimate >> se) << output;
    // Debian python3-statsmodels 0.13 OLS; 1e-12 relative (a well-conditioned design).
    EXPECT_NEAR(fit.coefficients[j].estimate, estimate, 1e-12 * std::fabs(estimate)) << j;
    EXPECT_NEAR(*fit.coefficients[j].se, se, 1e-12 * se) << j;
  }
  EXPECT_GT(std::fabs(fit.coefficients[1].estimate), 1e100);  // the edge is really reached
  EXPECT_GT(fit.covariance(1, 1), 1e200);
}

}  // namespace
}  // namespace stepledger

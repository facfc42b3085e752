// Criteria and distribution helpers. Expected values: hand formulas of DESIGN.md "Criteria"
// (common practice), Debian python3-scipy computed at test time (scipy.stats, independent of
// Boost), and published table values of Student's t and F (from memory).

#include <gtest/gtest.h>

#include <cmath>
#include <iomanip>
#include <limits>
#include <numbers>
#include <sstream>

#include "stepledger/engine/criteria.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

TEST(Criteria, HandFormulasWithIntercept) {
  CriteriaInputs in;
  in.n = 20;
  in.k = 3;
  in.rss = 10;
  in.tss = 50;
  in.log_weight_sum = 1.5;
  in.full_sigma2 = 0.5;
  const CriteriaValues v = ComputeCriteria(in);
  // Common practice (the convention written in DESIGN.md "Criteria").
  const double log_likelihood = -10 * (std::log(2 * std::numbers::pi) + std::log(0.5) + 1) + 0.75;
  EXPECT_NEAR(*v.r2, 0.8, 4 * kEps);
  EXPECT_NEAR(*v.adj_r2, 1 - (10.0 / 17) / (50.0 / 19), 4 * kEps);
  EXPECT_NEAR(*v.log_likelihood, log_likelihood, 1e-14 * std::abs(log_likelihood));
  EXPECT_NEAR(*v.aic, -2 * log_likelihood + 8, 1e-13);
  EXPECT_NEAR(*v.bic, -2 * log_likelihood + std::log(20.0) * 4, 1e-13);
  EXPECT_NEAR(*v.aicc, -2 * log_likelihood + 8 + 2.0 * 4 * 5 / 15, 1e-13);
  EXPECT_NEAR(*v.cp, 10 / 0.5 - 20 + 6, 1e-13);
  EXPECT_NEAR(*v.sigma, std::sqrt(10.0 / 17), 4 * kEps);
}

TEST(Criteria, AdjustedR2WithoutInterceptUsesN) {
  CriteriaInputs in;
  in.n = 11;
  in.k = 1;
  in.rss = 127.272727272727;
  in.tss = 200585.0;
  in.intercept = false;
  const CriteriaValues v = ComputeCriteria(in);
  EXPECT_NEAR(*v.adj_r2, 1 - (in.rss / 10) / (in.tss / 11), 4 * kEps);  // common practice
}

TEST(Criteria, DegenerateCasesAreUndefined) {
  CriteriaInputs constant_response;
  constant_response.n = 10;
  constant_response.k = 1;
  constant_response.rss = 0;
  constant_response.tss = 0;
  CriteriaValues v = ComputeCriteria(constant_response);
  EXPECT_FALSE(v.r2);
  EXPECT_FALSE(v.adj_r2);
  EXPECT_FALSE(v.log_likelihood) << "an exact fit has an unbounded likelihood";
  EXPECT_FALSE(v.aic);
  EXPECT_FALSE(v.aicc);
  EXPECT_FALSE(v.bic);
  EXPECT_FALSE(v.cp) << "no full-model sigma^2";
  ASSERT_TRUE(v.sigma);
  EXPECT_EQ(*v.sigma, 0.0);

  CriteriaInputs saturated;
  saturated.n = 4;
  saturated.k = 4;
  saturated.rss = 1;
  saturated.tss = 2;
  v = ComputeCriteria(saturated);
  EXPECT_TRUE(v.r2);
  EXPECT_FALSE(v.adj_r2);
  EXPECT_FALSE(v.sigma);
  EXPECT_FALSE(v.aicc) << "n - k - 2 <= 0";
  EXPECT_TRUE(v.aic);

  CriteriaInputs no_rows;
  v = ComputeCriteria(no_rows);
  EXPECT_FALSE(v.log_likelihood);
  EXPECT_FALSE(v.r2);
  EXPECT_FALSE(v.sigma);

  CriteriaInputs zero_sigma;
  zero_sigma.n = 10;
  zero_sigma.k = 2;
  zero_sigma.rss = 1;
  zero_sigma.tss = 3;
  zero_sigma.full_sigma2 = 0.0;
  EXPECT_FALSE(ComputeCriteria(zero_sigma).cp);
}

TEST(PartialF, HandFormulaAndDegenerateCases) {
  const PartialF f = ComputePartialF(30, 20, 2, 25, 5);
  ASSERT_TRUE(f.f);
  EXPECT_NEAR(*f.f, (10.0 / 2) / (20.0 / 20), 4 * kEps);  // common practice
  EXPECT_NEAR(*f.p, FisherFUpperP(5.0, 2, 20), 1e-15);
  const PartialF exact = ComputePartialF(3, 0, 1, 10, 2);
  EXPECT_TRUE(std::isinf(*exact.f));
  EXPECT_EQ(*exact.p, 0.0);
  EXPECT_FALSE(ComputePartialF(0, 0, 1, 10, 2).f) << "0/0";
  EXPECT_FALSE(ComputePartialF(3, 2, 0, 10, 2).f) << "no columns";
  EXPECT_FALSE(ComputePartialF(3, 2, 1, 5, 5).f) << "no residual df";
  const PartialF rounding = ComputePartialF(2, 2 + 1e-15, 1, 10, 2);
  EXPECT_EQ(*rounding.f, 0.0) << "a drop made negative by rounding counts as none";
  EXPECT_EQ(*rounding.p, 1.0);
}

TEST(Distributions, PublishedTableValues) {
  // From memory: the two-sided 5% point of t on 10 df is 2.228 and the 5% upper point of
  // F(2, 10) is 4.10 (printed in every statistics handbook's tables).
  EXPECT_NEAR(StudentTQuantile(0.975, 10), 2.228, 5e-4);
  EXPECT_NEAR(StudentTTwoSidedP(2.228, 10), 0.05, 1e-4);
  EXPECT_NEAR(FisherFUpperP(4.10, 2, 10), 0.05, 5e-4);
  EXPECT_NEAR(StudentTQuantile(0.975, 1e6), 1.959964, 1e-5);  // normal limit, from memory
}

TEST(Distributions, EdgeArguments) {
  EXPECT_EQ(StudentTTwoSidedP(std::numeric_limits<double>::infinity(), 5), 0.0);
  EXPECT_EQ(StudentTTwoSidedP(0, 5), 1.0);
  EXPECT_TRUE(std::isnan(StudentTTwoSidedP(1, 0)));
  EXPECT_TRUE(std::isnan(StudentTTwoSidedP(NAN, 3)));
  EXPECT_TRUE(std::isnan(StudentTQuantile(1.0, 3)));
  EXPECT_EQ(FisherFUpperP(0, 2, 3), 1.0);
  EXPECT_EQ(FisherFUpperP(std::numeric_limits<double>::infinity(), 2, 3), 0.0);
  EXPECT_TRUE(std::isnan(FisherFUpperP(1, 2, -1)));
  // Upper tails keep their digits far out (a 1 - cdf would give exactly 0 here).
  EXPECT_GT(FisherFUpperP(2000, 1, 100), 0.0);
  EXPECT_LT(FisherFUpperP(2000, 1, 100), 1e-60);
  EXPECT_GT(StudentTTwoSidedP(40, 100), 0.0);
}

TEST(Distributions, AgreeWithScipy) {
  if (!testing::PythonHasModules("scipy.stats")) {
    GTEST_SKIP() << "Debian python3-scipy not importable by " << testing::ReferencePython();
  }
  struct Case { double f, d1, d2, t, df, probability; };
  const Case cases[] = {{5.0, 2, 20, 2.5, 20, 0.975}, {0.3, 3, 7, 0.1, 7, 0.6},
                        {1234.5, 1, 300, 35.0, 300, 0.999}, {2.7, 10, 1000, -3.2, 2.5, 0.01},
                        {80.0, 4, 12, 12.0, 12, 0.5}};
  std::ostringstream script;
  script << "from scipy import stats\n";
  for (const Case& c : cases) {
    script << "print(repr(float(stats.f.sf(" << c.f << "," << c.d1 << "," << c.d2 << "))), "
           << "repr(float(2*stats.t.sf(abs(" << c.t << ")," << c.df << "))), "
           << "repr(float(stats.t.cdf(" << std::setprecision(17) << StudentTQuantile(c.probability, c.df)
           << std::setprecision(6) << "," << c.df << "))))\n";
  }
  testing::TempDir folder;
  const auto path = folder.Write("reference.py", script.str());
  std::string output;
  ASSERT_EQ(testing::RunCommand(testing::ReferencePython() + " " + path.string(), &output), 0);
  std::istringstream values(output);
  for (const Case& c : cases) {
    double f_p = 0, t_p = 0, probability_of_quantile = 0;
    ASSERT_TRUE(values >> f_p >> t_p >> probability_of_quantile) << output;
    // Debian python3-scipy (scipy.stats f.sf, t.sf, t.ppf); both libraries aim at ~1e-14.
    EXPECT_NEAR(FisherFUpperP(c.f, c.d1, c.d2), f_p, 1e-11 * f_p) << "F " << c.f;
    EXPECT_NEAR(StudentTTwoSidedP(c.t, c.df), t_p, 1e-11 * t_p) << "t " << c.t;
    // The quantile is checked through scipy's cdf (scipy's own t.ppf is off by 3e-10 relative at
    // df = 2.5, p = 0.01, where Boost agrees with a 40-digit evaluation of the incomplete beta).
    EXPECT_NEAR(probability_of_quantile, c.probability, 1e-12) << "quantile " << c.probability;
  }
}

}  // namespace
}  // namespace stepledger

// FitModel and ComputeDiagnostics: facts of the trade (common practice), the Hald cement data
// (reference folder, exact rational values), leave-one-out refits for PRESS and Cook's distance.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <sstream>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "support/row_diagnostics.h"
#include "support/dense_design.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

// A fitted problem held in memory: x excludes the intercept column; terms are single columns
// named x1, x2, ... unless groups are given.
struct Dense {
  arma::mat x;  // design columns (intercept included as column 0 when intercept)
  arma::vec y, w;
  Design design;
  Factor factor;
  RowReplay replay;
};

Dense MakeDense(const arma::mat& predictors, const arma::vec& y, const arma::vec& w, bool intercept,
                std::vector<std::pair<std::string, std::size_t>> terms = {}) {
  Dense dense;
  dense.x = intercept ? arma::join_rows(arma::ones(predictors.n_rows), predictors) : predictors;
  dense.y = y;
  dense.w = w;
  if (terms.empty()) {
    for (arma::uword j = 0; j < predictors.n_cols; ++j) terms.push_back({"x" + std::to_string(j + 1), 1});
  }
  dense.design = testing::MakeDenseDesign(intercept, terms, testing::PowerOfTwoScales(dense.x, y));
  dense.factor = testing::BuildFactor(dense.x, y, w, 16, dense.design.scales());
  dense.replay = testing::MemoryRowReplay(dense.x, y, w);
  return dense;
}

FitResult Fit(const Dense& dense, std::vector<std::size_t> terms = {}, bool refine = true) {
  if (terms.empty()) terms = testing::AllTerms(dense.design);
  return FitModel(dense.factor, dense.design, terms, FitOptions{}, refine ? &dense.replay : nullptr);
}

double Relative(double a, double b) { return std::abs(a - b) / std::max(std::abs(b), 1e-300); }

arma::mat RandomPredictors(std::size_t n, std::size_t m, unsigned seed) {
  arma::arma_rng::set_seed(seed);
  arma::mat x = arma::randn(n, m);
  x.col(0) = 50 + 10 * x.col(0);
  return x;
}

TEST(Fit, SumsOfSquaresAndR2Facts) {
  const arma::mat x = RandomPredictors(60, 5, 21);
  const arma::vec y = 3 + x * arma::vec{0.2, -1, 0.5, 0, 0.1} + arma::randn(60);
  const Dense dense = MakeDense(x, y, {}, true);
  double previous_r2 = 0;
  for (std::size_t terms = 0; terms <= 5; ++terms) {
    std::vector<std::size_t> indices;
    for (std::size_t t = 0; t < terms; ++t) indices.push_back(t);
    const FitResult fit = FitModel(dense.factor, dense.design, indices, FitOptions{}, &dense.replay);
    // Common practice: SSE + SSR = SST; R^2 never falls when a term joins; adjusted R^2 identity.
    EXPECT_NEAR(fit.rss + fit.ssr, fit.tss, 1e-14 * fit.tss);
    ASSERT_TRUE(fit.criteria.r2);
    EXPECT_GE(*fit.criteria.r2, previous_r2 - 1e-15) << terms << " terms";
    previous_r2 = *fit.criteria.r2;
    const double n = 60, k = static_cast<double>(fit.k);
    EXPECT_NEAR(*fit.criteria.adj_r2, 1 - (1 - *fit.criteria.r2) * (n - 1) / (n - k), 1e-13);
    EXPECT_EQ(fit.k, terms + 1);
    // The ANOVA's term rows add up to the regression row (sequential SS from the factor).
    double sequential = 0;
    for (std::size_t row = 0; row < terms; ++row) sequential += fit.anova[row].ss;
    EXPECT_NEAR(sequential, fit.ssr, 1e-10 * fit.tss);
    EXPECT_EQ(fit.anova.back().source, "total");
    EXPECT_EQ(fit.anova.back().df, 59);
  }
}

TEST(Fit, WeightedEqualsUnweightedOfRowsScaledByRootWeight) {
  const arma::mat x = RandomPredictors(40, 3, 22);
  const arma::vec y = 1 + x * arma::vec{0.3, 2, -1} + arma::randn(40);
  const arma::vec w = 0.2 + 3 * arma::randu(40);
  // Without an intercept column of ones, so that scaling the rows keeps the same model.
  const arma::mat with_one = arma::join_rows(arma::ones(40), x);
  const Dense weighted = MakeDense(with_one, y, w, false);
  const Dense scaled = MakeDense(with_one.each_col() % arma::sqrt(w), y % arma::sqrt(w), {}, false);
  const FitResult a = Fit(weighted), b = Fit(scaled);
  for (std::size_t j = 0; j < 4; ++j) {
    EXPECT_LT(Relative(a.beta(j), b.beta(j)), 1e-12) << j;
    EXPECT_LT(Relative(*a.coefficients[j].se, *b.coefficients[j].se), 1e-12) << j;
  }
  EXPECT_LT(Relative(a.rss, b.rss), 1e-12);
}

TEST(Fit, IntegerWeightsEqualDuplicatedRows) {
  const arma::mat x = RandomPredictors(30, 2, 23);
  const arma::vec y = 2 - x * arma::vec{0.1, 0.7} + arma::randn(30);
  arma::vec w(30);
  for (arma::uword i = 0; i < 30; ++i) w(i) = 1 + i % 3;
  arma::mat x_repeated;
  arma::vec y_repeated;
  for (arma::uword i = 0; i < 30; ++i) {
    for (int copy = 0; copy < static_cast<int>(w(i)); ++copy) {
      x_repeated = arma::join_cols(x_repeated, x.row(i));
      y_repeated = arma::join_cols(y_repeated, arma::vec{y(i)});
    }
  }
  const FitResult a = Fit(MakeDense(x, y, w, true));
  const FitResult b = Fit(MakeDense(x_repeated, y_repeated, {}, true));
  for (std::size_t j = 0; j < 3; ++j) EXPECT_LT(Relative(a.beta(j), b.beta(j)), 1e-12) << j;
  EXPECT_LT(Relative(a.rss, b.rss), 1e-12);
  EXPECT_LT(Relative(a.tss, b.tss), 1e-12) << "TSS about the weighted mean";
}

TEST(Fit, HaldCementFullModel) {
  std::ifstream file(testing::ReferenceDir() / "hald-cement/hald.csv");
  ASSERT_TRUE(file) << "Hald cement data missing under " << testing::ReferenceDir();
  std::string line;
  std::getline(file, line);  // header x1,x2,x3,x4,y
  arma::mat x(13, 4);
  arma::vec y(13);
  for (int i = 0; i < 13 && std::getline(file, line); ++i) {
    std::replace(line.begin(), line.end(), ',', ' ');
    std::istringstream fields(line);
    fields >> x(i, 0) >> x(i, 1) >> x(i, 2) >> x(i, 3) >> y(i);
  }
  const FitResult fit = Fit(MakeDense(x, y, {}, true));
  // Hald cement data, reference README "All 15 subsets" (exact rational arithmetic, rounded):
  // RSS 47.86363935, R^2 0.98237562, coefficients 62.405369, 1.5511026, 0.51016758,
  // 0.10190940, -0.14406103; TSS 882623/325.
  EXPECT_NEAR(fit.rss, 47.86363935, 1e-8);
  EXPECT_NEAR(fit.tss, 882623.0 / 325, 1e-10);
  EXPECT_NEAR(*fit.criteria.r2, 0.98237562, 1e-8);
  const double expected[] = {62.405369, 1.5511026, 0.51016758, 0.10190940, -0.14406103};
  for (int j = 0; j < 5; ++j) EXPECT_NEAR(fit.beta(j), expected[j], 1e-7 * std::abs(expected[j]) + 1e-8) << j;
  // The four cement components sum to nearly 100%: large VIFs are the known trait of this data.
  for (int j = 1; j < 5; ++j) EXPECT_GT(*fit.coefficients[j].vif, 10.0) << j;
  EXPECT_FALSE(fit.coefficients[0].vif);
}

TEST(Fit, AliasedColumnIsReportedAndLeftOut) {
  arma::arma_rng::set_seed(24);
  arma::mat x = arma::randn(20, 3);
  x.col(2) = 2 * x.col(0) - x.col(1);  // exact dependence
  const arma::vec y = arma::randn(20);
  const FitResult fit = Fit(MakeDense(x, y, {}, true));
  EXPECT_EQ(fit.status, FitStatus::kAliased);
  EXPECT_EQ(fit.aliased_columns, std::vector<std::string>{"x3"});
  EXPECT_EQ(fit.k, 3u);
  EXPECT_EQ(fit.coefficients.size(), 3u);
  EXPECT_EQ(fit.anova[2].df, 0);  // the aliased term adds no column
  EXPECT_NE(fit.FullReport().find("left out as aliased"), std::string::npos);
  EXPECT_STREQ(ToString(fit.status), "aliased");
}

TEST(Fit, NoResidualDegreesOfFreedom) {
  const arma::mat x = {{1.0, 2.0}, {2.0, 1.0}, {4.0, 3.0}};
  const arma::vec y = {1.0, 3.0, 2.0};
  const FitResult fit = Fit(MakeDense(x, y, {}, true));
  EXPECT_EQ(fit.status, FitStatus::kNoResidualDf);
  EXPECT_EQ(fit.k, 3u);
  for (const auto& coefficient : fit.coefficients) {
    EXPECT_FALSE(coefficient.se);
    EXPECT_FALSE(coefficient.t);
    EXPECT_FALSE(coefficient.p);
  }
  EXPECT_FALSE(fit.criteria.sigma);
  EXPECT_FALSE(fit.f);
  EXPECT_TRUE(fit.covariance.is_empty());
  const std::string report = fit.FullReport();
  EXPECT_NE(report.find("undefined"), std::string::npos);
  EXPECT_EQ(report.find("nan"), std::string::npos) << report;
}

TEST(Fit, ReportsShowTheModelAndNoNan) {
  const arma::mat x = RandomPredictors(25, 2, 25);
  const arma::vec y = x.col(0) + arma::randn(25);
  FitOptions options;
  options.cp_sigma2 = 1.0;
  const Dense dense = MakeDense(x, y, {}, true);
  const FitResult fit = FitModel(dense.factor, dense.design, testing::AllTerms(dense.design), options, &dense.replay);
  const std::string full = fit.FullReport(), brief = fit.BriefReport();
  EXPECT_NE(brief.find("explained by: intercept, x1, x2"), std::string::npos) << brief;
  EXPECT_EQ(full.find(" + "), std::string::npos) << full;
  // The overall F test in APA style: F(df1, df2) = value, p clause.
  EXPECT_NE(full.find("F(2, 22) = "), std::string::npos) << full;
  for (const char* word : {"Coefficients", "x1", "x2", "intercept", "regression", "residual", "total", "AIC", "BIC", "95%"}) {
    EXPECT_NE(full.find(word), std::string::npos) << word << "\n" << full;
  }
  EXPECT_EQ(full.find("nan"), std::string::npos) << full;
  EXPECT_TRUE(fit.criteria.cp);
  EXPECT_GT(fit.refinement_passes, 0);
}

TEST(Fit, OptionsAreValidatedByName) {
  const Dense dense = MakeDense(RandomPredictors(10, 1, 26), arma::randn(10), {}, true);
  auto expect_error = [&](FitOptions options, const std::string& field) {
    try {
      FitModel(dense.factor, dense.design, testing::AllTerms(dense.design), options, nullptr);
      FAIL() << "expected InputError for " << field;
    } catch (const InputError& error) {
      EXPECT_NE(std::string(error.what()).find(field), std::string::npos) << error.what();
    }
  };
  FitOptions options;
  options.confidence_level = 1.0;
  expect_error(options, "confidence_level");
  options = {};
  options.refinement_tolerance = 0;
  expect_error(options, "refinement_tolerance");
  options = {};
  options.max_refinement_passes = -1;
  expect_error(options, "max_refinement_passes");
  options = {};
  options.cp_sigma2 = -2.0;
  expect_error(options, "cp_sigma2");
  options = {};
  options.kernel.alias_tolerance = 2;
  expect_error(options, "alias_tolerance");
  const std::size_t bad_term[] = {7};
  EXPECT_THROW(FitModel(dense.factor, dense.design, bad_term, FitOptions{}, nullptr), std::invalid_argument);
}

TEST(Fit, RefinementChecksTheRowsReplayed) {
  const Dense dense = MakeDense(RandomPredictors(12, 1, 27), arma::randn(12), {}, true);
  const Dense other = MakeDense(RandomPredictors(11, 1, 27), arma::randn(11), {}, true);
  EXPECT_THROW(FitModel(dense.factor, dense.design, testing::AllTerms(dense.design), FitOptions{}, &other.replay),
               NumericalError);
}

TEST(Diagnostics, LeveragePressAndCooksDistanceAgainstLeaveOneOut) {
  const arma::mat x = RandomPredictors(15, 2, 28);
  const arma::vec y = 1 + x * arma::vec{0.05, 1} + 0.3 * arma::randn(15);
  const Dense dense = MakeDense(x, y, {}, true);
  const FitResult fit = Fit(dense);
  DiagnosticsResult diagnostics;
  const std::vector<RowDiagnostic> rows = testing::DiagnoseEveryRow(fit, dense.design, dense.replay, &diagnostics);
  ASSERT_EQ(rows.size(), 15u);
  EXPECT_EQ(diagnostics.rows, 15u);
  double leverage_sum = 0, press = 0;
  const double sigma2 = fit.rss / fit.df_residual;
  for (arma::uword i = 0; i < 15; ++i) {
    const RowDiagnostic& row = rows[i];
    leverage_sum += row.leverage;
    EXPECT_EQ(row.row_index, i);
    // Direct leave-one-out refit (common practice: PRESS and Cook's distance by definition).
    arma::mat x_out = dense.x;
    arma::vec y_out = y;
    x_out.shed_row(i);
    y_out.shed_row(i);
    arma::vec beta_out;
    ASSERT_TRUE(arma::solve(beta_out, x_out, y_out, arma::solve_opts::no_approx));
    const double deleted_residual = y(i) - arma::dot(dense.x.row(i), beta_out);
    press += deleted_residual * deleted_residual;
    const arma::vec shift = dense.x * (fit.beta - beta_out);
    const double cooks = arma::dot(shift, shift) / (3 * sigma2);
    EXPECT_LT(Relative(*row.cooks_distance, cooks), 1e-9) << "row " << i;
    EXPECT_NEAR(row.residual, y(i) - arma::dot(dense.x.row(i), fit.beta), 1e-12);
    EXPECT_NEAR(*row.standardized_residual, row.residual / std::sqrt(sigma2 * (1 - row.leverage)), 1e-12);
  }
  EXPECT_NEAR(leverage_sum, 3.0, 1e-12) << "sum of leverages = k (common practice)";
  ASSERT_TRUE(diagnostics.press);
  EXPECT_LT(Relative(*diagnostics.press, press), 1e-10);
  double max_leverage = 0;
  for (const auto& row : rows) max_leverage = std::max(max_leverage, row.leverage);
  EXPECT_EQ(diagnostics.max_leverage, max_leverage);
  // sum w e^2 over the rows is the fit's RSS (to rounding).
  EXPECT_LT(Relative(diagnostics.weighted_residual_sum_of_squares, fit.rss), 1e-10);
}

TEST(Diagnostics, RowFittedExactlyHasUndefinedPress) {
  // A dummy column that is 1 on one row only: that row has leverage 1.
  arma::mat x(8, 2, arma::fill::zeros);
  x.col(0) = arma::linspace(1, 8, 8);
  x(3, 1) = 1;
  const arma::vec y = {1.0, 2.5, 2.9, 7.0, 5.2, 5.8, 7.1, 8.3};
  const Dense dense = MakeDense(x, y, {}, true);
  const FitResult fit = Fit(dense);
  DiagnosticsResult diagnostics;
  const std::vector<RowDiagnostic> rows = testing::DiagnoseEveryRow(fit, dense.design, dense.replay, &diagnostics);
  EXPECT_NEAR(rows[3].leverage, 1.0, 1e-12);
  EXPECT_FALSE(rows[3].standardized_residual);
  EXPECT_FALSE(rows[3].cooks_distance);
  EXPECT_FALSE(diagnostics.press);
  EXPECT_TRUE(rows[0].cooks_distance);
  EXPECT_EQ(diagnostics.leverage_one_rows, 1u);
  // The row that fits itself stands out and ranks first where its values are undefined.
  EXPECT_EQ(diagnostics.largest_cooks_distance.front().row_index, 3u);
  EXPECT_EQ(diagnostics.largest_standardized_residual.front().row_index, 3u);
  EXPECT_EQ(diagnostics.largest_leverage.front().row_index, 3u);
  EXPECT_GE(diagnostics.stand_out, 1u);
}

}  // namespace
}  // namespace stepledger

// ModelToJson: the contract's model shape (CONTRACT.md "JSON results"), undefined values as
// null, and the ANOVA split into term rows and summary rows.

#include <gtest/gtest.h>

#include <limits>

#include "stepledger/audit/model_json.h"

namespace stepledger {
namespace {

FitResult SmallFit() {
  FitResult fit;
  fit.terms = {"total", "x"};  // a term may be called "total"; it must stay a term row
  fit.n = 10;
  fit.k = 3;
  fit.df_residual = 7;
  fit.rss = 2.5;
  fit.tss = 10;
  fit.ssr = 7.5;
  fit.criteria.r2 = 0.75;
  fit.criteria.adj_r2 = 0.6785714285714286;
  fit.criteria.sigma = 0.5976143046671968;
  fit.criteria.log_likelihood = -7.3;
  fit.criteria.aic = 22.6;
  fit.criteria.aicc = 29.26;
  fit.criteria.bic = 23.8;
  fit.f = 10.5;
  fit.f_p = 0.0077;
  CoefficientEstimate intercept;
  intercept.name = intercept.term = "intercept";
  intercept.estimate = 1.25;
  intercept.se = 0.5;
  intercept.t = 2.5;
  intercept.p = 0.04;
  intercept.ci_low = 0.07;
  intercept.ci_high = 2.43;
  CoefficientEstimate slope = intercept;
  slope.name = slope.term = "x";
  slope.vif = 1.7;
  CoefficientEstimate other = intercept;
  other.name = other.term = "total";
  other.se = std::nullopt;  // undefined
  other.t = std::numeric_limits<double>::infinity();  // not representable in JSON
  fit.coefficients = {intercept, other, slope};
  fit.anova = {{"total", 1, 5, 5.0, 14, 0.007},
               {"x", 1, 2.5, 2.5, 7, 0.03},
               {"regression", 2, 7.5, 3.75, 10.5, 0.0077},
               {"residual", 7, 2.5, 0.357, std::nullopt, std::nullopt},
               {"total", 9, 10, std::nullopt, std::nullopt, std::nullopt}};
  return fit;
}

TEST(ModelJson, HasEveryContractKey) {
  const nlohmann::json model = ModelToJson(SmallFit());
  for (const char* key : {"terms", "n", "k", "rss", "tss", "r2", "adj_r2", "sigma",
                          "log_likelihood", "aic", "aicc", "bic", "f", "f_p", "coefficients",
                          "anova"}) {
    EXPECT_TRUE(model.contains(key)) << key;
  }
  for (const auto& coefficient : model["coefficients"]) {
    for (const char* key : {"name", "term", "estimate", "se", "t", "p", "ci_low", "ci_high", "vif"}) {
      EXPECT_TRUE(coefficient.contains(key)) << key;
    }
  }
  EXPECT_EQ(model["n"], 10);
  EXPECT_EQ(model["k"], 3);
  EXPECT_EQ(model["terms"], nlohmann::json({"total", "x"}));
  EXPECT_DOUBLE_EQ(model["coefficients"][2]["vif"].get<double>(), 1.7);
  EXPECT_EQ(model["status"], "completed");
}

TEST(ModelJson, UndefinedAndNonFiniteValuesAreNull) {
  const nlohmann::json model = ModelToJson(SmallFit());
  EXPECT_TRUE(model["cp"].is_null());                        // nullopt
  EXPECT_TRUE(model["coefficients"][0]["vif"].is_null());    // intercept
  EXPECT_TRUE(model["coefficients"][1]["se"].is_null());     // nullopt
  EXPECT_TRUE(model["coefficients"][1]["t"].is_null());      // +inf
  EXPECT_FALSE(model.dump().empty());                         // serialisable
  EXPECT_TRUE(NumberOrNull(std::numeric_limits<double>::quiet_NaN()).is_null());
  EXPECT_EQ(NumberOrNull(2.0), 2.0);
}

TEST(ModelJson, AnovaSplitsTermRowsFromSummaryRows) {
  const nlohmann::json anova = ModelToJson(SmallFit())["anova"];
  ASSERT_EQ(anova["terms"].size(), 2u);
  EXPECT_EQ(anova["terms"][0]["source"], "total");  // the term, by position
  EXPECT_EQ(anova["terms"][0]["df"], 1);
  EXPECT_EQ(anova["terms"][1]["source"], "x");
  EXPECT_EQ(anova["regression"]["df"], 2);
  EXPECT_EQ(anova["residual"]["df"], 7);
  EXPECT_TRUE(anova["residual"]["f"].is_null());
  EXPECT_EQ(anova["total"]["df"], 9);  // the summary row, not the term
}

TEST(ModelJson, CountsAreJsonIntegers) {
  // Degrees of freedom are doubles in FitResult; the JSON says 7, not 7.0.
  const nlohmann::json model = ModelToJson(SmallFit());
  EXPECT_EQ(model["df_residual"].dump(), "7");
  EXPECT_EQ(model["n"].dump(), "10");
  EXPECT_EQ(model["k"].dump(), "3");
  for (const auto& [source, row] : model["anova"].items()) {
    if (source == "terms") {
      for (const auto& term_row : row) EXPECT_TRUE(term_row["df"].is_number_integer()) << term_row.dump();
    } else {
      EXPECT_TRUE(row["df"].is_number_integer()) << source << ": " << row.dump();
    }
  }
  EXPECT_EQ(CountJson(-2.0).dump(), "-2") << "n < k: the residual df is negative";
}

TEST(ModelJson, TheRegressionSumOfSquaresSaysWhatItHolds) {
  const nlohmann::json model = ModelToJson(SmallFit());
  EXPECT_FALSE(model.contains("ssr")) << "format_version 1's name, read by AuditInCurrentShape only";
  EXPECT_EQ(model["ss_regression"], 7.5);
  EXPECT_EQ(model["rss"], 2.5);
}

TEST(ModelJson, RowsDroppedAreAListOfReasonColumnRows) {
  RowAccounting accounting;
  EXPECT_EQ(RowsDroppedJson(accounting), nlohmann::json::array());
  accounting.CountDropped(DropReason::kZeroWeight, "units");
  accounting.CountDropped(DropReason::kMissing, "age_months");
  accounting.CountDropped(DropReason::kMissing, "age_months");
  EXPECT_EQ(RowsDroppedJson(accounting), nlohmann::json::parse(R"([
      {"reason": "missing", "column": "age_months", "rows": 2},
      {"reason": "zero weight", "column": "units", "rows": 1}])"));
  EXPECT_TRUE(RowsDroppedJson(accounting)[0]["rows"].is_number_integer());
}

}  // namespace
}  // namespace stepledger

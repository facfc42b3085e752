#pragma once
// Fit criteria from RSS, by the one convention of the README (DESIGN.md "Criteria"):
//  n rows used, k coefficients including the intercept;
//  logL = -n/2 (ln 2pi + ln(RSS/n) + 1) + 1/2 sum ln w_i   (the weights term is 0 unweighted);
//  AIC = -2 logL + 2(k+1); BIC = -2 logL + ln(n)(k+1)  (sigma^2 counts as a parameter);
//  AICc = AIC + 2(k+1)(k+2)/(n-k-2);  Cp = RSS/sigma2_full - n + 2k;
//  R^2 = 1 - RSS/TSS (TSS about the weighted mean with an intercept, about zero without);
//  adjusted R^2 = 1 - (RSS/(n-k)) / (TSS/(n-1))   (n in place of n-1 without intercept);
//  partial F for d columns = ((RSS0-RSS1)/d) / (RSS1/(n-k1)) on (d, n-k1) df.
// Every value is optional: nullopt means undefined (degenerate cases listed per field).

#include <cstdint>
#include <optional>

namespace stepledger {

struct CriteriaInputs {
  double n = 0;        ///< rows used
  double k = 0;        ///< coefficients including the intercept
  double rss = 0;
  double tss = 0;
  bool intercept = true;
  double log_weight_sum = 0;  ///< sum of ln w_i over used rows (0 without weights)
  std::optional<double> full_sigma2;  ///< sigma^2 of the largest eligible model, for Cp
};

struct CriteriaValues {
  std::optional<double> r2;              ///< undefined when TSS = 0
  std::optional<double> adj_r2;          ///< undefined when TSS = 0 or n <= k
  std::optional<double> log_likelihood;  ///< undefined when RSS = 0 (exact fit) or n = 0
  std::optional<double> aic;             ///< undefined with log_likelihood
  std::optional<double> aicc;            ///< undefined with aic or when n - k - 2 <= 0
  std::optional<double> bic;             ///< undefined with log_likelihood
  std::optional<double> cp;              ///< undefined without full_sigma2 > 0
  std::optional<double> sigma;           ///< sqrt(RSS/(n-k)); undefined when n <= k
};

CriteriaValues ComputeCriteria(const CriteriaInputs& in);

struct PartialF {
  std::optional<double> f;  ///< undefined when n - k1 <= 0 or d = 0; +inf when RSS1 = 0 < RSS0
  std::optional<double> p;  ///< upper tail of F(d, n-k1); undefined with f
};

/// Partial F of d columns: RSS0 without them, RSS1 with them, k1 coefficients with them.
PartialF ComputePartialF(double rss_without, double rss_with, double d, double n, double k_with);
/// The same from the change RSS0 - RSS1 given directly (GroupScore::rss_change: formed from the
/// factor, not as a difference, so a small drop beside a large RSS keeps its digits).
PartialF ComputePartialFFromChange(double rss_change, double rss_with, double d, double n, double k_with);

/// Upper-tail probabilities and quantiles (Boost.Math; upper tails through complement(), never
/// 1 - cdf). Each returns NaN when a degree of freedom is not > 0 or an argument is NaN.
/// P(|T| >= |t|) on df degrees of freedom; 0 for infinite t.
double StudentTTwoSidedP(double t, double df);
/// The t value with P(T <= value) = probability; NaN unless 0 < probability < 1.
double StudentTQuantile(double probability, double df);
/// P(F >= f) on (df1, df2) degrees of freedom; 1 for f <= 0, 0 for f = +inf.
double FisherFUpperP(double f, double df1, double df2);

}  // namespace stepledger

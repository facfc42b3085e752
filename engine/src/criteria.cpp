#include "stepledger/engine/criteria.h"

#include <cmath>
#include <limits>
#include <numbers>

#include <boost/math/distributions/fisher_f.hpp>
#include <boost/math/distributions/students_t.hpp>

namespace stepledger {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

}  // namespace

// Degenerate cases (each value is left undefined rather than given a number):
//  R^2: TSS <= 0 (a constant response); adjusted R^2: also n <= k or, with an intercept, n < 2;
//  logL, AIC, BIC: n = 0 or RSS <= 0 (an exact fit has an unbounded likelihood);
//  AICc: also n - k - 2 <= 0; Cp: no full-model sigma^2 > 0; sigma: n <= k.
// Formulas: DESIGN.md "Criteria" (the usual textbook definitions, with sigma^2 counted as a
// parameter and the Gaussian log-likelihood at the maximum-likelihood variance RSS/n).
CriteriaValues ComputeCriteria(const CriteriaInputs& in) {
  CriteriaValues out;
  const double n = in.n, k = in.k;
  if (in.tss > 0) {
    out.r2 = 1.0 - in.rss / in.tss;
    const double total_df = in.intercept ? n - 1 : n;
    if (n > k && total_df > 0) out.adj_r2 = 1.0 - (in.rss / (n - k)) / (in.tss / total_df);
  }
  if (n > 0 && in.rss > 0) {
    const double log_likelihood =
        -0.5 * n * (std::log(2 * std::numbers::pi) + std::log(in.rss / n) + 1.0) +
        0.5 * in.log_weight_sum;
    out.log_likelihood = log_likelihood;
    out.aic = -2 * log_likelihood + 2 * (k + 1);
    out.bic = -2 * log_likelihood + std::log(n) * (k + 1);
    if (n - k - 2 > 0) out.aicc = *out.aic + 2 * (k + 1) * (k + 2) / (n - k - 2);
  }
  if (in.full_sigma2 && *in.full_sigma2 > 0) out.cp = in.rss / *in.full_sigma2 - n + 2 * k;
  if (n > k) out.sigma = std::sqrt(in.rss / (n - k));
  return out;
}

// Degenerate cases: d <= 0 or n - k1 <= 0: undefined. RSS1 = 0: +inf (p = 0) when RSS0 > 0,
// undefined when RSS0 = 0 too (0/0). A drop that rounding made slightly negative counts as 0.
PartialF ComputePartialF(double rss_without, double rss_with, double d, double n, double k_with) {
  return ComputePartialFFromChange(rss_without - rss_with, rss_with, d, n, k_with);
}

PartialF ComputePartialFFromChange(double rss_change, double rss_with, double d, double n, double k_with) {
  PartialF out;
  const double df_residual = n - k_with;
  if (!(d > 0) || !(df_residual > 0)) return out;
  const double drop = std::max(0.0, rss_change);
  if (rss_with <= 0) {
    if (drop > 0) {
      out.f = std::numeric_limits<double>::infinity();
      out.p = 0.0;
    }
    return out;
  }
  out.f = (drop / d) / (rss_with / df_residual);
  out.p = FisherFUpperP(*out.f, d, df_residual);
  return out;
}

// Upper tails use Boost's complement() (never 1 - cdf, which loses every digit of small p).
double StudentTTwoSidedP(double t, double df) {
  if (std::isnan(t) || !(df > 0)) return kNaN;
  if (std::isinf(t)) return 0.0;
  const boost::math::students_t distribution(df);
  return 2.0 * boost::math::cdf(boost::math::complement(distribution, std::abs(t)));
}

double StudentTQuantile(double probability, double df) {
  if (!(probability > 0 && probability < 1) || !(df > 0)) return kNaN;
  const boost::math::students_t distribution(df);
  return boost::math::quantile(distribution, probability);
}

double FisherFUpperP(double f, double df1, double df2) {
  if (std::isnan(f) || !(df1 > 0) || !(df2 > 0)) return kNaN;
  if (std::isinf(f)) return 0.0;
  if (f <= 0) return 1.0;
  const boost::math::fisher_f distribution(df1, df2);
  return boost::math::cdf(boost::math::complement(distribution, f));
}

}  // namespace stepledger

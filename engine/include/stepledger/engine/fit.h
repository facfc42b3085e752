#pragma once
// The fit of one model: coefficients, SE, t, p, intervals, covariance, VIF, ANOVA and the
// criteria, all from the factor, then refined against the rows.
//
// Refinement (the final model of every command): starting from the factor's solution, each
// pass over the rows accumulates r = y - X b, X'W r and sum w r^2 in compensated
// (double-double) arithmetic, then solves R'R d = X'W r through the factor and sets b += d
// (the corrected semi-normal equations); the RSS of b + d is the pass's sum less g'd. The
// rows' design values are x + x_low (UsedRow::x_low): with the low parts of long double powers
// the refinement fits the long double design (NIST StRD Filip: 11 digits instead of the 7.6
// that x^k rounded to double allows whatever the solver). Without a replay the fit comes from
// the factor alone (RefinementStop::kNotRefined).
//
// When to stop. R is the exact factor of a design within E of the rows' (the QR's backward
// error and the rounding of x + x_low to x, both of the order of the unit roundoff u = 2^-53
// relative), so each pass shrinks the error of b by a factor rho of about ||E|| / sigma_min,
// estimated before the first pass as rho_hat = k u / rcond (k coefficients, rcond of R11;
// NIST StRD Filip contracts by 8.6e-7 against rho_hat = 1.5e-5). A pass's correction c (the
// largest |d_j| / max(|b_j|, |b_j + d_j|)) is the size of the error it removed, so what the
// next pass could still change is about theta c, theta = the larger of rho_hat and the last
// observed ratio of corrections. Refinement stops (kConverged) as soon as c or theta c is below
// refinement_tolerance: a well-conditioned design (rho_hat 1e-15 to 1e-13, first correction
// near 1e-13) stops after one pass, its next correction estimated below 1e-25; an ill-conditioned
// one makes more (Filip: 2, the second correction 2e-14 times theta = 1.5e-5). A pass that
// corrects more than the one before is not applied (kNotShrinking: the rounding floor of an
// ill-conditioned fit is reached, the previous estimate is the better one); kPassLimit after
// max_refinement_passes.
//
// (X'WX)^-1 for the standard errors. The factor's inverse has a relative error of about
// rho_hat too (NIST StRD: 0.5 rho_hat for Norris, 0.025 for Wampler1-5, 0.006 for Filip).
// When rho_hat is at most kInverseFromFactorLimit (2^-40, about 1e-12: the standard errors then
// have at least 12 correct digits) it is kept as it is, and the passes cost O(k) per row.
// Otherwise the first pass also accumulates the Gram matrix X'WX in compensated arithmetic,
// O(k^2) per row, and the inverse is refined against it in memory by C += (R'R)^-1 (I - A C)
// until its correction is below refinement_tolerance. The per-row sums run in blocks of rows
// laid out by column with eight accumulator lanes (engine/src/refine.cpp), in the same order
// whatever the instruction set, so a given row order gives the same bits on any x86-64.
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include <armadillo>

#include "stepledger/engine/criteria.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/kernel.h"
#include "stepledger/engine/row_sums.h"

namespace stepledger {

struct FitOptions {
  /// Level of the confidence intervals, in (0, 1). Default 0.95.
  double confidence_level = 0.95;
  /// sigma^2 of the full model for Mallows' Cp (data units); Cp is undefined without it.
  std::optional<double> cp_sigma2;
  /// Passes over the rows to refine the final fit (0: factor only). Default 10.
  int max_refinement_passes = 10;
  /// Stop refining when the largest relative correction of a pass, or the estimate of what the
  /// next pass could still change (see the top of this file), is below this; the inverse is
  /// refined until its correction is below it. Default 1e-15.
  double refinement_tolerance = 1e-15;
  KernelOptions kernel;
  /// Throws InputError naming the field when out of range.
  void Validate() const;
};

struct CoefficientEstimate {
  std::string name;   ///< design column name ("intercept", "age", "grade=A", "age:grade=A", ...)
  std::string term;   ///< owning term ("intercept" for the intercept)
  double estimate = 0;
  /// Undefined when n <= k. With an exact fit (se = 0), t is +-inf and p = 0 for a non-zero
  /// estimate, and t and p are undefined for a zero one.
  std::optional<double> se, t, p, ci_low, ci_high;
  /// Variance inflation factor C_jj * (weighted sum of squares of x_j about its weighted mean);
  /// without an intercept about zero (the uncentred VIF). Undefined for the intercept and when
  /// the model has no intercept and a single column. 1 for a lone predictor beside the intercept.
  std::optional<double> vif;
};

/// ANOVA rows: one per term (sequential SS in model order: the drop in RSS when the term's
/// columns join the model, read from the factor), then "regression" (SSR = SST - SSE, so that
/// SSE + SSR = SST by construction; the terms' rows sum to it to the factor's rounding),
/// "residual" (SSE) and "total" (SST; df n-1 with an intercept, n without).
struct AnovaRow {
  std::string source;  ///< a term (sequential SS in model order), "regression", "residual", "total"
  double df = 0;
  double ss = 0;
  std::optional<double> ms, f, p;
};

enum class FitStatus {
  kCompleted,       ///< all coefficients estimated
  kAliased,         ///< some columns are aliased with earlier ones; they are not estimated
  kNoResidualDf,    ///< n <= k: coefficients estimated (or not), no SE, t, p (takes precedence
                    ///< over kAliased; aliased_columns is filled either way)
};
const char* ToString(FitStatus status);

/// Why refinement stopped (see the top of this file).
enum class RefinementStop {
  kNotRefined,    ///< no replay, max_refinement_passes = 0 or an empty model: factor only
  kConverged,     ///< the last correction, or what the next pass could change, is below the tolerance
  kNotShrinking,  ///< a pass corrected more than the one before; it was not applied
  kPassLimit,     ///< max_refinement_passes made without converging
};
/// "not-refined", "converged", "not-shrinking", "pass-limit".
const char* ToString(RefinementStop stop);
/// The inverse of ToString; nullopt for any other text.
std::optional<RefinementStop> RefinementStopFromString(std::string_view text);

/// The factor's (X'WX)^-1 is kept without a Gram pass when k u / rcond is at most this.
inline constexpr double kInverseFromFactorLimit = 0x1p-40;

struct FitResult {
  FitStatus status = FitStatus::kCompleted;
  std::vector<std::string> terms;        ///< term names in model order (no intercept)
  std::vector<std::size_t> term_indices; ///< same, as Design term indices
  std::vector<std::size_t> columns;      ///< design columns estimated, model order
  std::vector<std::string> aliased_columns;  ///< design columns left out as aliased
  bool intercept = true;
  std::uint64_t n = 0;                   ///< rows used
  std::size_t k = 0;                     ///< coefficients estimated, intercept included
  double df_residual = 0;                ///< n - k
  double rss = 0, tss = 0, ssr = 0;      ///< SSE, SST, SSR = SST - SSE
  double weight_sum = 0, log_weight_sum = 0;
  CriteriaValues criteria;
  std::optional<double> f, f_p;          ///< overall F test against the intercept-only (or empty) model
  std::vector<CoefficientEstimate> coefficients;
  arma::vec beta;                        ///< estimates, same order as columns
  arma::mat xtwx_inverse;                ///< refined (X'WX)^-1 (data units, model order)
  arma::mat covariance;                  ///< sigma^2 (X'WX)^-1; empty when n <= k
  /// R11 of the model in the factor's scaled units (see ModelState::ModelTriangle) and the
  /// scales of the model columns then the response: what diagnostics use for leverages
  /// without cancellation (h = w ||R11^-T D x||^2).
  arma::mat model_triangle;
  std::vector<double> model_scales;
  std::vector<AnovaRow> anova;
  double confidence_level = 0.95;
  double rcond = 0;                      ///< reciprocal condition number of R11
  double alias_tolerance = 0;
  int refinement_passes = 0;             ///< passes over the rows made
  double refinement_correction = 0;      ///< last applied largest relative correction
  RefinementStop refinement_stop = RefinementStop::kNotRefined;  ///< why refinement stopped

  /// A few lines: terms, n, R^2, sigma, AIC, BIC.
  std::string BriefReport() const;
  /// Coefficient table, ANOVA and fit statistics, as `stepledger fit` prints them.
  std::string FullReport() const;
};

/// Fits the intercept (when the design has one) plus the given terms in that order.
/// replay, when given and options.max_refinement_passes > 0, refines the fit against the rows.
FitResult FitModel(const Factor& factor, const Design& design,
                   std::span<const std::size_t> term_indices, const FitOptions& options,
                   const RowReplay* replay = nullptr);
/// The same fit, refined (when options.max_refinement_passes > 0) with the sums of `sums`
/// (engine/row_sums.h): a run shared by processes has every process sum its own rows.
FitResult FitModel(const Factor& factor, const Design& design,
                   std::span<const std::size_t> term_indices, const FitOptions& options,
                   const SummingReplay& sums);

/// h_ii at or above 1 - kLeverageOneTolerance counts as 1 (the row fits itself exactly):
/// its standardised residual, Cook's distance and PRESS are undefined.
inline constexpr double kLeverageOneTolerance = 1e-10;

/// x'b for one row of the model's values (model_x: the values of fit.columns, model order,
/// unscaled; k = fit.columns.size() of them), summed in double-double (compensated) arithmetic
/// so that the order of the columns does not matter to the last digits. The diagnostics
/// (engine/diagnostics.h) and the prediction evaluator (engine/prediction.h) share it.
double LinearPredictor(const FitResult& fit, std::span<const double> model_x);

/// The fitted value and the residual of one row (model_x as LinearPredictor, y its response):
/// the residual y - x'b is taken from the double-double x'b, so it keeps x'b's low part.
struct FittedRow {
  double fitted = 0;
  double residual = 0;
};
FittedRow FitRow(const FitResult& fit, std::span<const double> model_x, double y);

/// x'(X'WX)^-1 x for one row of the model's values (as LinearPredictor): the leverage at unit
/// weight, computed as ||R11^-T D x||^2 through fit.model_triangle and fit.model_scales (a sum
/// of squares: no cancellation, no inverse formed). scratch: k doubles, overwritten (so that a
/// pass over the rows allocates nothing). Throws std::invalid_argument when the fit carries no
/// model factor and NumericalError when the factor is singular. Cost O(k^2).
double UnitLeverage(const FitResult& fit, std::span<const double> model_x, std::span<double> scratch);

}  // namespace stepledger

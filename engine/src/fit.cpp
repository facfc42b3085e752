#include "stepledger/engine/fit.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>
#include <string>

#include "double_double.h"
#include "lapack.h"
#include "refine.h"
#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

using dd::DoubleDouble;
using dd::TwoProduct;

std::optional<double> Defined(double value) {
  if (std::isnan(value)) return std::nullopt;
  return value;
}


}  // namespace

const char* ToString(RefinementStop stop) {
  switch (stop) {
    case RefinementStop::kNotRefined: return "not-refined";
    case RefinementStop::kConverged: return "converged";
    case RefinementStop::kNotShrinking: return "not-shrinking";
    case RefinementStop::kPassLimit: return "pass-limit";
  }
  return "unknown";
}

std::optional<RefinementStop> RefinementStopFromString(std::string_view text) {
  for (RefinementStop stop : {RefinementStop::kNotRefined, RefinementStop::kConverged,
                              RefinementStop::kNotShrinking, RefinementStop::kPassLimit}) {
    if (text == ToString(stop)) return stop;
  }
  return std::nullopt;
}

const char* ToString(FitStatus status) {
  switch (status) {
    case FitStatus::kCompleted: return "completed";
    case FitStatus::kAliased: return "aliased";
    case FitStatus::kNoResidualDf: return "no-residual-df";
  }
  return "unknown";
}

void FitOptions::Validate() const {
  auto fail = [](const std::string& field, double value, const std::string& rule) {
    std::ostringstream message;
    message << "fit option " << field << " = " << value << " is out of range: " << rule;
    throw InputError(message.str());
  };
  if (!(confidence_level > 0 && confidence_level < 1)) fail("confidence_level", confidence_level, "it must lie in (0, 1)");
  if (cp_sigma2 && !(*cp_sigma2 > 0 && std::isfinite(*cp_sigma2))) fail("cp_sigma2", *cp_sigma2, "it must be a positive finite number");
  if (max_refinement_passes < 0) fail("max_refinement_passes", max_refinement_passes, "it must be 0 or more");
  if (!(refinement_tolerance > 0 && refinement_tolerance < 1)) fail("refinement_tolerance", refinement_tolerance, "it must lie in (0, 1)");
  kernel.Validate();
}

namespace {

// What the factor solve leaves for the later phases besides the FitResult fields it sets.
struct SequentialSolve {
  std::vector<std::string> column_terms;  // owning term's name per estimated column
  std::vector<AnovaRow> term_rows;        // sequential sums of squares, no F test yet
};

// The intercept then each term's columns go into the model in order, aliased columns left out;
// the drop in RSS as each term enters is its sequential sum of squares. Then the model is
// solved from the factor alone: columns, R11, beta, (X'WX)^-1, RSS and TSS of `fit`.
SequentialSolve SolveFromFactor(const Factor& factor, const Design& design,
                                std::span<const std::size_t> term_indices,
                                const FitOptions& options, FitResult& fit) {
  SequentialSolve solve;
  ModelState state(factor, options.kernel);
  auto try_add = [&](std::size_t column, const std::string& term) {
    if (state.IsAliased(column)) {
      fit.aliased_columns.push_back(design.columns[column].name);
      return false;
    }
    const std::size_t single[] = {column};
    state.Add(single);
    fit.columns.push_back(column);
    solve.column_terms.push_back(term);
    return true;
  };
  if (design.intercept) {
    if (design.columns.empty() || design.columns[0].term != kNoTerm) {
      throw std::invalid_argument("FitModel: a design with an intercept must have it as column 0");
    }
    try_add(0, "intercept");
  }
  const double tss_from_factor = state.Rss();  // about the mean with an intercept, else about zero
  double rss_before = tss_from_factor;
  for (std::size_t term_index : term_indices) {
    if (term_index >= design.terms.size()) {
      throw std::invalid_argument("FitModel: term index " + std::to_string(term_index) +
                                  " out of range (" + std::to_string(design.terms.size()) + " terms)");
    }
    if (std::find(fit.term_indices.begin(), fit.term_indices.end(), term_index) != fit.term_indices.end()) {
      throw std::invalid_argument("FitModel: term '" + design.terms[term_index].name + "' listed twice");
    }
    const DesignTerm& term = design.terms[term_index];
    fit.terms.push_back(term.name);
    fit.term_indices.push_back(term_index);
    double df = 0;
    for (std::size_t column = term.first_column; column < term.first_column + term.column_count; ++column) {
      if (try_add(column, term.name)) df += 1;
    }
    const double rss_after = state.Rss();
    AnovaRow row;
    row.source = term.name;
    row.df = df;
    row.ss = std::max(0.0, rss_before - rss_after);
    solve.term_rows.push_back(row);
    rss_before = rss_after;
  }

  const ModelSolution solution = state.Solve();
  fit.k = fit.columns.size();
  fit.rcond = solution.rcond;
  fit.model_triangle = state.ModelTriangle();
  for (std::size_t column : fit.columns) fit.model_scales.push_back(factor.scales[column]);
  fit.model_scales.push_back(factor.scales.back());
  fit.beta = solution.beta;
  fit.xtwx_inverse = solution.xtwx_inverse;
  fit.rss = solution.rss;
  fit.tss = tss_from_factor;
  return solve;
}

// Replaces beta, (X'WX)^-1, RSS and TSS from the factor by their refined values (see Refine):
// the factor alone leaves digits to cancellation when the design is ill-conditioned. Converts
// to the factor's scaled units and back.
void RefineAgainstRows(const Factor& factor, const Design& design, const FitOptions& options,
                       const SummingReplay& replay, FitResult& fit) {
  const std::size_t k = fit.k;
  const double y_scale = factor.scales.back();
  arma::vec beta_scaled(k);
  arma::mat inverse_scaled(k, k);
  for (std::size_t i = 0; i < k; ++i) {
    beta_scaled(i) = fit.beta(i) * y_scale / fit.model_scales[i];
    for (std::size_t j = 0; j < k; ++j) {
      inverse_scaled(i, j) = fit.xtwx_inverse(i, j) / (fit.model_scales[i] * fit.model_scales[j]);
    }
  }
  const double y_shift = design.intercept && !factor.column_stats.empty()
                             ? factor.column_stats.back().mean * y_scale
                             : 0.0;
  detail::RefineProblem problem;
  problem.triangle = fit.model_triangle;
  problem.columns = fit.columns;
  problem.column_scales.assign(fit.model_scales.begin(), fit.model_scales.end() - 1);
  problem.y_scale = y_scale;
  problem.intercept = design.intercept;
  problem.y_shift = y_shift;
  problem.rcond = fit.rcond;
  problem.factor_rows = factor.rows;
  const detail::Refinement refined =
      detail::Refine(problem, std::move(beta_scaled), std::move(inverse_scaled), options, replay);
  for (std::size_t i = 0; i < k; ++i) {
    fit.beta(i) = refined.beta(i) * fit.model_scales[i] / y_scale;
    for (std::size_t j = 0; j < k; ++j) {
      fit.xtwx_inverse(i, j) = refined.inverse(i, j) * fit.model_scales[i] * fit.model_scales[j];
    }
  }
  fit.rss = refined.rss / (y_scale * y_scale);
  fit.tss = refined.tss / (y_scale * y_scale);
  fit.refinement_passes = refined.passes;
  fit.refinement_correction = refined.correction;
  fit.refinement_stop = refined.stop;
}

// Status, residual df, SSR and the selection criteria: they need the final RSS and TSS only,
// so they follow refinement and come before the tables that use them.
void SetStatusAndCriteria(const Factor& factor, const Design& design, const FitOptions& options,
                          FitResult& fit) {
  const double n = static_cast<double>(fit.n);
  const double k_value = static_cast<double>(fit.k);
  fit.df_residual = n - k_value;
  fit.ssr = fit.tss - fit.rss;  // SSE + SSR = SST by construction
  if (fit.n <= fit.k) {
    fit.status = FitStatus::kNoResidualDf;
  } else if (!fit.aliased_columns.empty()) {
    fit.status = FitStatus::kAliased;
  }

  CriteriaInputs inputs;
  inputs.n = n;
  inputs.k = k_value;
  inputs.rss = fit.rss;
  inputs.tss = fit.tss;
  inputs.intercept = design.intercept;
  inputs.log_weight_sum = factor.log_weight_sum;
  inputs.full_sigma2 = options.cp_sigma2;
  fit.criteria = ComputeCriteria(inputs);
}

// The covariance and one row per estimated column: estimate, SE, t, p, confidence interval
// and VIF. Undefined (not zero) where n <= k leaves no residual df.
void FillCoefficientTable(const Design& design, const std::vector<std::string>& column_terms,
                          const FitOptions& options, FitResult& fit) {
  const std::size_t k = fit.k;
  const bool has_residual_df = fit.n > k;
  const double sigma2 = has_residual_df ? fit.rss / fit.df_residual : 0.0;
  if (has_residual_df) fit.covariance = sigma2 * fit.xtwx_inverse;
  const double t_quantile =
      has_residual_df ? StudentTQuantile(0.5 + 0.5 * options.confidence_level, fit.df_residual) : 0.0;

  // Weighted sums of squares of each model column about its weighted mean (with an intercept,
  // which sits at model position 0) or about zero (without), read from R11 in scaled units:
  // column p of R11 below row 0 is the part of x_p orthogonal to the intercept.
  const std::size_t first_row = design.intercept ? 1 : 0;
  // Without an intercept a lone column's uncentred VIF is 1 by construction and says nothing.
  const bool vif_defined_for_model = design.intercept || k >= 2;
  for (std::size_t position = 0; position < k; ++position) {
    CoefficientEstimate coefficient;
    const std::size_t column = fit.columns[position];
    coefficient.name = design.columns[column].name;
    coefficient.term = column_terms[position];
    coefficient.estimate = fit.beta(position);
    if (has_residual_df) {
      const double se = std::sqrt(std::max(0.0, sigma2 * fit.xtwx_inverse(position, position)));
      coefficient.se = se;
      if (se > 0) {
        coefficient.t = coefficient.estimate / se;
      } else if (coefficient.estimate != 0) {
        coefficient.t = std::copysign(std::numeric_limits<double>::infinity(), coefficient.estimate);
      }
      if (coefficient.t) coefficient.p = Defined(StudentTTwoSidedP(*coefficient.t, fit.df_residual));
      coefficient.ci_low = coefficient.estimate - t_quantile * se;
      coefficient.ci_high = coefficient.estimate + t_quantile * se;
    }
    const bool is_intercept = design.intercept && position == 0;
    if (!is_intercept && vif_defined_for_model) {
      double centred_squares = 0;  // scaled units; C'_jj * SS'_j equals the data-unit product
      for (std::size_t row = first_row; row <= position; ++row) {
        centred_squares += fit.model_triangle(row, position) * fit.model_triangle(row, position);
      }
      const double scale = fit.model_scales[position];
      coefficient.vif = fit.xtwx_inverse(position, position) / (scale * scale) * centred_squares;
    }
    fit.coefficients.push_back(std::move(coefficient));
  }
}

// The overall F test against the intercept-only model (or the empty model without an
// intercept) and the ANOVA table: the sequential term rows with their F tests, then
// regression, residual and total.
void FillAnova(const Design& design, std::vector<AnovaRow> term_rows, FitResult& fit) {
  const double n = static_cast<double>(fit.n);
  const double k_value = static_cast<double>(fit.k);
  const bool has_residual_df = fit.n > fit.k;
  const double regression_df = design.intercept ? k_value - 1 : k_value;
  const double mse = has_residual_df ? fit.rss / fit.df_residual : 0.0;
  auto f_test = [&](double ss, double df, std::optional<double>& f, std::optional<double>& p) {
    if (!(df > 0) || !has_residual_df) return;
    if (mse > 0) {
      f = (std::max(0.0, ss) / df) / mse;
      p = Defined(FisherFUpperP(*f, df, fit.df_residual));
    } else if (ss > 0) {
      f = std::numeric_limits<double>::infinity();
      p = 0.0;
    }
  };
  f_test(fit.ssr, regression_df, fit.f, fit.f_p);

  for (AnovaRow& row : term_rows) {
    if (row.df > 0) row.ms = row.ss / row.df;
    f_test(row.ss, row.df, row.f, row.p);
    fit.anova.push_back(row);
  }
  AnovaRow regression{"regression", regression_df, fit.ssr, std::nullopt, fit.f, fit.f_p};
  if (regression_df > 0) regression.ms = fit.ssr / regression_df;
  AnovaRow residual{"residual", fit.df_residual, fit.rss, std::nullopt, std::nullopt, std::nullopt};
  if (has_residual_df) residual.ms = mse;
  AnovaRow total{"total", design.intercept ? n - 1 : n, fit.tss, std::nullopt, std::nullopt, std::nullopt};
  fit.anova.push_back(regression);
  fit.anova.push_back(residual);
  fit.anova.push_back(total);
}

// FitModel with refinement through sums (replay: none, or one whose sums may come from parts).
FitResult FitModelSummed(const Factor& factor, const Design& design,
                         std::span<const std::size_t> term_indices, const FitOptions& options,
                         const SummingReplay* replay) {
  options.Validate();
  if (factor.column_count() != design.column_count()) {
    throw std::invalid_argument("FitModel: the factor has " + std::to_string(factor.column_count()) +
                                " design columns, the design " + std::to_string(design.column_count()));
  }
  FitResult fit;
  fit.intercept = design.intercept;
  fit.n = factor.rows;
  fit.weight_sum = factor.weight_sum;
  fit.log_weight_sum = factor.log_weight_sum;
  fit.confidence_level = options.confidence_level;
  fit.alias_tolerance = options.kernel.alias_tolerance;

  SequentialSolve solve = SolveFromFactor(factor, design, term_indices, options, fit);
  if (replay != nullptr && *replay && options.max_refinement_passes > 0 && fit.k > 0) {
    RefineAgainstRows(factor, design, options, *replay, fit);
  }
  SetStatusAndCriteria(factor, design, options, fit);
  FillCoefficientTable(design, solve.column_terms, options, fit);
  FillAnova(design, std::move(solve.term_rows), fit);
  return fit;
}

}  // namespace

FitResult FitModel(const Factor& factor, const Design& design,
                   std::span<const std::size_t> term_indices, const FitOptions& options,
                   const RowReplay* replay) {
  if (replay == nullptr || !*replay) return FitModelSummed(factor, design, term_indices, options, nullptr);
  const SummingReplay sums = SumOverReplay(*replay);
  return FitModelSummed(factor, design, term_indices, options, &sums);
}

FitResult FitModel(const Factor& factor, const Design& design,
                   std::span<const std::size_t> term_indices, const FitOptions& options,
                   const SummingReplay& sums) {
  return FitModelSummed(factor, design, term_indices, options, &sums);
}

namespace {

void RequireModelFactor(const FitResult& fit, const char* caller) {
  const std::size_t k = fit.columns.size();
  if (fit.model_triangle.n_rows != k || fit.model_scales.size() != k + 1) {
    throw std::invalid_argument(std::string(caller) +
                                ": the fit carries no model factor (not made by FitModel)");
  }
}

// x'b in double-double; the residual y - x'b keeps its low part too.
DoubleDouble CompensatedLinearPredictor(const FitResult& fit, std::span<const double> model_x) {
  assert(model_x.size() == fit.columns.size() && fit.beta.n_elem == fit.columns.size());
  DoubleDouble sum;
  for (std::size_t j = 0; j < model_x.size(); ++j) sum = sum + TwoProduct(model_x[j], fit.beta(j));
  return sum;
}

}  // namespace

double LinearPredictor(const FitResult& fit, std::span<const double> model_x) {
  return CompensatedLinearPredictor(fit, model_x).value();
}

FittedRow FitRow(const FitResult& fit, std::span<const double> model_x, double y) {
  const DoubleDouble fitted = CompensatedLinearPredictor(fit, model_x);
  return {fitted.value(), (DoubleDouble{y, 0} + (-fitted)).value()};
}

double UnitLeverage(const FitResult& fit, std::span<const double> model_x, std::span<double> scratch) {
  RequireModelFactor(fit, "UnitLeverage");
  const std::size_t k = fit.columns.size();
  assert(model_x.size() == k && scratch.size() >= k);
  if (k == 0) return 0;
  for (std::size_t j = 0; j < k; ++j) scratch[j] = model_x[j] * fit.model_scales[j];
  // x'(X'WX)^-1 x = ||R11^-T D x||^2 (a sum of squares: no cancellation).
  const int info = lapack::SolveUpperTriangular(true, static_cast<int>(k), 1, fit.model_triangle.memptr(),
                                                static_cast<int>(k), scratch.data(), static_cast<int>(k));
  if (info > 0) throw NumericalError("leverage: the model's triangular factor is singular");
  const arma::vec solved(scratch.data(), k, /*copy_aux_mem=*/false, /*strict=*/true);
  return arma::dot(solved, solved);
}

}  // namespace stepledger

#pragma once
// A filled ValidationResult for the tests of how validation is rendered, recorded, read back,
// checked and compared. Its numbers are invented (they exercise the rendering, not the
// computation, which has its own tests); the terms are the run's own, so that the final
// model's terms and the bootstrap's candidate terms agree.

#include <algorithm>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "stepledger/run/run_plan.h"
#include "stepledger/run/validation.h"

namespace stepledger::testing {

/// Every part filled: 5 folds, a 20% holdout with 10 deciles, a 200-replicate bootstrap whose
/// inclusion lists every candidate term (the final terms at 0.9, others at 0.2, `rare_term` —
/// when it is one of them — at `rare_share`), a coefficient spread per (name, estimate), and one
/// substitute pair (the first two candidates) when there are two candidates or more.
inline ValidationResult FilledValidation(const std::vector<std::string>& candidates,
                                         const std::vector<std::string>& final_terms,
                                         const std::vector<std::pair<std::string, double>>& coefficients,
                                         std::optional<double> sigma, const std::string& rare_term = "",
                                         double rare_share = 0.5) {
  ValidationResult validation;
  validation.folds.settings = {5, 1};
  validation.folds.rmse = 26.5;
  validation.folds.residual_sd = sigma;
  for (std::size_t fold = 0; fold < 5; ++fold) {
    validation.folds.per_fold.push_back(
        {fold, 40 + fold, 40.0 + static_cast<double>(fold), 27000.0 + 125.5 * static_cast<double>(fold)});
  }
  HoldoutValidation holdout;
  holdout.settings = {0.2, 7};
  holdout.rows = 41;
  holdout.weight = 41;
  holdout.rmse = 27.25;
  holdout.mean_error = -1.5;
  holdout.r2 = 0.93;
  holdout.rows_outside_ranges = 2;
  holdout.rows_high_leverage = 1;
  for (std::size_t decile = 1; decile <= 10; ++decile) {
    const double level = 300.0 + 50.0 * static_cast<double>(decile);
    holdout.calibration.push_back({decile, 4, level, level + (decile % 2 == 0 ? 6.0 : -4.0)});
  }
  validation.holdout = holdout;

  BootstrapValidation bootstrap;
  bootstrap.settings = {200, 11};
  const auto in_final = [&final_terms](const std::string& term) {
    return std::find(final_terms.begin(), final_terms.end(), term) != final_terms.end();
  };
  for (const std::string& term : candidates) {
    double share = in_final(term) ? 0.9 : 0.2;
    if (term == rare_term) share = rare_share;
    bootstrap.inclusion.push_back({term, share});
  }
  const std::size_t size = final_terms.size();
  if (size > 0) bootstrap.sizes.push_back({size - 1, 30});
  bootstrap.sizes.push_back({size, 150});
  bootstrap.sizes.push_back({size + 1, 20});
  bootstrap.models.push_back({final_terms, 0.7, true});
  bootstrap.models.push_back({candidates, 0.1, false});
  bootstrap.chosen_among_top = true;
  for (const auto& [name, estimate] : coefficients) {
    CoefficientSpread spread;
    spread.name = name;
    spread.inclusion = 0.9;
    spread.conditional.emplace(estimate - 1.0, estimate + 1.0);
    spread.unconditional = {0.0, estimate + 1.5};
    bootstrap.coefficients.push_back(std::move(spread));
  }
  if (candidates.size() >= 2) bootstrap.substitutes.push_back({candidates[0], candidates[1], 0.05, 0.45, 0.4, 0.89});
  validation.bootstrap = std::move(bootstrap);
  return validation;
}

/// FilledValidation with a run's candidate terms, final terms, coefficients and sigma.
inline ValidationResult FilledValidation(const RunResult& run, const std::string& rare_term = "",
                                         double rare_share = 0.5) {
  std::vector<std::string> candidates;
  for (const DesignTerm& term : run.design.terms) candidates.push_back(term.name);
  std::vector<std::pair<std::string, double>> coefficients;
  for (const CoefficientEstimate& coefficient : run.fit.coefficients) coefficients.emplace_back(coefficient.name, coefficient.estimate);
  return FilledValidation(candidates, run.fit.terms, coefficients, run.fit.criteria.sigma, rare_term, rare_share);
}

}  // namespace stepledger::testing

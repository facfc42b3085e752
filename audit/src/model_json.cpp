#include "stepledger/audit/model_json.h"

#include <cassert>
#include <cmath>
#include <cstdint>

namespace stepledger {

nlohmann::json NumberOrNull(const std::optional<double>& value) {
  // JSON has no NaN or infinity; an exact fit's F (+inf) is therefore null, as undefined is.
  if (!value || !std::isfinite(*value)) return nullptr;
  return *value;
}

nlohmann::json CountJson(double count) {
  // Degrees of freedom are held as doubles for the arithmetic; they are whole numbers (the
  // residual df n - k is negative when n < k).
  assert(count == std::floor(count) && std::fabs(count) < 0x1p63);
  return static_cast<std::int64_t>(count);
}

nlohmann::json RowsDroppedJson(const RowAccounting& accounting) {
  nlohmann::json dropped = nlohmann::json::array();
  for (const RowDrop& entry : accounting.rows_dropped) {
    dropped.push_back({{"reason", ToString(entry.reason)}, {"column", entry.column}, {"rows", entry.rows}});
  }
  return dropped;
}

namespace {

nlohmann::json AnovaRowToJson(const AnovaRow& row) {
  return {{"source", row.source}, {"df", CountJson(row.df)}, {"ss", NumberOrNull(row.ss)},
          {"ms", NumberOrNull(row.ms)}, {"f", NumberOrNull(row.f)}, {"p", NumberOrNull(row.p)}};
}

}  // namespace

nlohmann::json ModelToJson(const FitResult& fit) {
  nlohmann::json model;
  model["terms"] = fit.terms;
  model["n"] = fit.n;
  model["k"] = fit.k;
  model["df_residual"] = CountJson(fit.df_residual);
  model["rss"] = NumberOrNull(fit.rss);
  model["tss"] = NumberOrNull(fit.tss);
  model["ss_regression"] = NumberOrNull(fit.ssr);
  model["r2"] = NumberOrNull(fit.criteria.r2);
  model["adj_r2"] = NumberOrNull(fit.criteria.adj_r2);
  model["sigma"] = NumberOrNull(fit.criteria.sigma);
  model["log_likelihood"] = NumberOrNull(fit.criteria.log_likelihood);
  model["aic"] = NumberOrNull(fit.criteria.aic);
  model["aicc"] = NumberOrNull(fit.criteria.aicc);
  model["bic"] = NumberOrNull(fit.criteria.bic);
  model["cp"] = NumberOrNull(fit.criteria.cp);
  model["f"] = NumberOrNull(fit.f);
  model["f_p"] = NumberOrNull(fit.f_p);
  model["status"] = ToString(fit.status);
  model["intercept"] = fit.intercept;
  model["rcond"] = NumberOrNull(fit.rcond);
  model["alias_tolerance"] = fit.alias_tolerance;
  model["refinement_passes"] = fit.refinement_passes;
  model["refinement_correction"] = NumberOrNull(fit.refinement_correction);
  model["refinement_stop"] = ToString(fit.refinement_stop);
  model["aliased_columns"] = fit.aliased_columns;
  model["confidence_level"] = fit.confidence_level;
  model["weight_sum"] = NumberOrNull(fit.weight_sum);
  model["log_weight_sum"] = NumberOrNull(fit.log_weight_sum);

  nlohmann::json coefficients = nlohmann::json::array();
  for (const CoefficientEstimate& c : fit.coefficients) {
    coefficients.push_back({{"name", c.name},
                            {"term", c.term},
                            {"estimate", NumberOrNull(c.estimate)},
                            {"se", NumberOrNull(c.se)},
                            {"t", NumberOrNull(c.t)},
                            {"p", NumberOrNull(c.p)},
                            {"ci_low", NumberOrNull(c.ci_low)},
                            {"ci_high", NumberOrNull(c.ci_high)},
                            {"vif", NumberOrNull(c.vif)}});
  }
  model["coefficients"] = std::move(coefficients);

  // Sequential (type I) rows of the terms in model order, then the summary rows by name.
  nlohmann::json anova = {{"terms", nlohmann::json::array()}};
  // The term rows come first in model order; matching them by position keeps a term that
  // happens to be called "total" from being mistaken for the summary row.
  std::size_t next_term = 0;
  for (const AnovaRow& row : fit.anova) {
    if (next_term < fit.terms.size() && row.source == fit.terms[next_term]) {
      anova["terms"].push_back(AnovaRowToJson(row));
      ++next_term;
    } else {
      anova[row.source] = AnovaRowToJson(row);
    }
  }
  model["anova"] = std::move(anova);
  return model;
}

}  // namespace stepledger

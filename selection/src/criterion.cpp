#include "stepledger/selection/criterion.h"

#include "stepledger/engine/number_format.h"

#include <cmath>
#include <sstream>

#include "stepledger/engine/errors.h"
#include "search_internal.h"

namespace stepledger {
namespace {

std::string FormatNumber(double value) {
  std::ostringstream text;
  text.precision(6);
  text << value;
  return text.str();
}

/// The RSS-based criteria: one formula each from engine/criteria.h.
class FormulaCriterion final : public ModelCriterion {
 public:
  FormulaCriterion(Criterion kind, CriterionContext context) : kind_(kind), context_(context) {}
  Criterion kind() const override { return kind_; }
  bool is_p_value_rule() const override { return kind_ == Criterion::kPartialF; }

  Score ScoreModel(const ModelToScore& model) const override {
    Score score;
    // Every criterion is undefined without residual degrees of freedom (module comment).
    if (context_.n <= model.k) {
      score.undefined_reason = "n <= k (n = " + FormatNumber(context_.n) +
                               ", k = " + FormatNumber(model.k) + ")";
      return score;
    }
    if (kind_ == Criterion::kPartialF) {
      score.value = model.rss / (context_.n - model.k);
      return score;
    }
    CriteriaInputs inputs;
    inputs.n = context_.n;
    inputs.k = model.k;
    inputs.rss = model.rss;
    inputs.tss = context_.tss;
    inputs.intercept = context_.intercept;
    inputs.log_weight_sum = context_.log_weight_sum;
    inputs.full_sigma2 = context_.full_sigma2;
    const CriteriaValues values = ComputeCriteria(inputs);
    std::optional<double> chosen;
    switch (kind_) {
      case Criterion::kAdjR2:
        if (values.adj_r2) chosen = -*values.adj_r2;
        else score.undefined_reason = "adjusted R^2 undefined (total sum of squares is 0)";
        break;
      case Criterion::kAic:
        chosen = values.aic;
        if (!chosen) score.undefined_reason = "aic undefined (RSS = 0: exact fit)";
        break;
      case Criterion::kAicc:
        chosen = values.aicc;
        if (!chosen) {
          score.undefined_reason = values.aic ? "aicc undefined (n - k - 2 <= 0)"
                                              : "aicc undefined (RSS = 0: exact fit)";
        }
        break;
      case Criterion::kBic:
        chosen = values.bic;
        if (!chosen) score.undefined_reason = "bic undefined (RSS = 0: exact fit)";
        break;
      case Criterion::kCp:
        chosen = values.cp;
        if (!chosen) {
          score.undefined_reason =
              "cp undefined (sigma^2 of the largest eligible model is undefined: n <= k or RSS = 0 there)";
        }
        break;
      case Criterion::kPartialF:
      case Criterion::kCv:
        break;
    }
    if (chosen && std::isfinite(*chosen)) score.value = chosen;
    else if (chosen) score.undefined_reason = std::string(ToString(kind_)) + " is not finite";
    return score;
  }

  double Reported(double internal_score) const override {
    return kind_ == Criterion::kAdjR2 ? -internal_score : internal_score;
  }

  std::string ValueName() const override {
    return kind_ == Criterion::kPartialF ? "residual mean square" : ToString(kind_);
  }

 private:
  Criterion kind_;
  CriterionContext context_;
};

/// The k-fold cross-validated RMSE from the per-fold factors (engine/cross_validation.h):
/// the model's columns refitted on every training triangle, no row read.
class CvCriterion final : public ModelCriterion {
 public:
  explicit CvCriterion(CriterionContext context) : context_(std::move(context)) {}
  Criterion kind() const override { return Criterion::kCv; }

  Score ScoreModel(const ModelToScore& model) const override {
    FoldErrors errors = context_.cross_validation->Evaluate(model.columns);
    Score score;
    if (errors.rmse && std::isfinite(*errors.rmse)) {
      score.value = errors.rmse;
      score.fold_sse = std::move(errors.sse);
      return score;
    }
    if (errors.rmse) {
      score.undefined_reason = "cv is not finite";
    } else if (errors.aliased_column) {
      const std::size_t column = *errors.aliased_column;
      const std::string name = column < context_.column_names.size() ? context_.column_names[column]
                                                                     : std::to_string(column);
      const std::string fold = std::to_string(errors.aliased_fold);
      score.undefined_reason =
          "cv undefined (column '" + name + "' is aliased in the training rows of fold " + fold +
          ", every fold's rows but " + fold + "'s, folds counted from 0: relative norm " +
          FormatQuantity(errors.aliased_relative_norm, 6) + ", below alias_tolerance " +
          selection_detail::Threshold(context_.cross_validation->kernel().alias_tolerance) + ")";
    } else {
      score.undefined_reason = "cv undefined (" + errors.undefined_reason + ")";
    }
    return score;
  }

  std::string ValueName() const override { return "cv"; }

 private:
  CriterionContext context_;
};

}  // namespace

std::unique_ptr<ModelCriterion> MakeCriterion(Criterion criterion,
                                              const CriterionContext& context) {
  if (criterion == Criterion::kCv) {
    if (context.cross_validation == nullptr) {
      throw PlanError("criterion",
                      "criterion 'cv' needs the per-fold factors of the data pass, and this run "
                      "has none");
    }
    return std::make_unique<CvCriterion>(context);
  }
  return std::make_unique<FormulaCriterion>(criterion, context);
}

bool ScoresTie(double a, double b) {
  if (a == b) return true;  // also equal infinities
  if (!std::isfinite(a) || !std::isfinite(b)) return false;
  return std::fabs(a - b) <= kTieRelativeTolerance * std::max(std::fabs(a), std::fabs(b));
}

std::string FormatCriterionValue(Criterion criterion, std::optional<double> value) {
  return FormatFixed(value, criterion == Criterion::kAdjR2 ? 4 : 2);
}

}  // namespace stepledger

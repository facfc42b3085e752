#pragma once
// The validation parts of a run (run/validation.h) computed from its factors and spill: the
// final model's k-fold error and the holdout's error and calibration. Not installed.

#include <functional>
#include <optional>
#include <span>
#include <vector>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/model_support.h"
#include "stepledger/engine/spill.h"
#include "stepledger/run/validation.h"

namespace stepledger::run_detail {

/// The k-fold error of the final model. cross_validation: the pass's fold factors over every
/// design column, or null when they were too large to build (kFoldFactorBudget): the folds of
/// the model's own columns are then built by build_folds (BuildFoldFactors over the spill, or over
/// every process's spill in a shared run), one more replay of the rows.
using FoldFactorBuilder = std::function<std::vector<Factor>(std::span<const std::size_t> columns)>;
FoldValidation FinalModelFolds(const CrossValidation* cross_validation, const FoldFactorBuilder& build_folds,
                               const FitResult& fit, const FoldSettings& settings, const KernelOptions& kernel);

/// The final model judged on the held-out rows: two replays of them (the first learns the
/// deciles of the predictions with a quantile sketch, the second fills the calibration bins).
/// held_out: a replay of the held-out rows (RowSet::kHeldOutRows).
HoldoutValidation EvaluateHoldout(const RowReplay& held_out, const Design& design, const FitResult& fit,
                                  const PredictionSupport& support, const HoldoutSettings& holdout);

}  // namespace stepledger::run_detail

#pragma once
// The validation parts of a run (run/validation.h) computed from its factors and spill: the
// final model's k-fold error and the holdout's error and calibration. Not installed.

#include <functional>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/diagnostics.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/model_support.h"
#include "stepledger/engine/share_exchange.h"
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

/// One held-out row as the holdout needs it: the model's prediction, the row's response and
/// weight, and whether it lies outside the model rows' term ranges or above their largest
/// leverage at unit weight.
struct HeldOutRow {
  double prediction = 0;
  double y = 0;
  double weight = 1;
  bool outside_ranges = false;
  bool high_leverage = false;
};

/// What a held-out row's evaluation needs of the final model and its support, copied so that it
/// can travel as bytes to the process that holds the row.
class HeldOutEvaluator {
 public:
  HeldOutEvaluator(const Design& design, const FitResult& fit, const PredictionSupport& support);
  HeldOutRow Evaluate(const UsedRow& row);
  std::string Write() const;
  static HeldOutEvaluator Read(std::string_view bytes);

 private:
  struct RangeCheck {
    std::size_t column = 0;
    double min = 0, max = 0;
  };
  explicit HeldOutEvaluator(RowDiagnoser model) : model_(std::move(model)) {}
  RowDiagnoser model_;
  std::vector<RangeCheck> ranges_;
  std::optional<double> max_unit_leverage_;  // set when the model has terms and the support knows it
};

/// A held-out row's record between processes (exact).
void WriteHeldOutRow(ByteWriter& out, const HeldOutRow& row);
HeldOutRow ReadHeldOutRow(ByteReader& in);

/// The held-out rows evaluated wherever they lie, handed to `visit` in record order: this
/// process's replay (EvaluateHere), or every process of a shared run its own rows.
using HeldOutReplay =
    std::function<void(const HeldOutEvaluator& evaluator, const std::function<void(const HeldOutRow&)>& visit)>;
/// The rows of `held_out` (RowSet::kHeldOutRows), evaluated by this process.
HeldOutReplay EvaluateHere(RowReplay held_out);

/// The final model judged on the held-out rows: two replays of them (the first learns the
/// deciles of the predictions with a quantile sketch, the second fills the calibration bins),
/// folded here in record order whoever evaluated the rows (the same bits).
HoldoutValidation EvaluateHoldout(const HeldOutReplay& held_out, const HeldOutEvaluator& evaluator,
                                  const HoldoutSettings& holdout);

}  // namespace stepledger::run_detail

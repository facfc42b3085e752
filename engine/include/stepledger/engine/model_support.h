#pragma once
// What the diagnostics pass of a final model learns beside the per-row diagnostics, for pricing
// new rows and for the extrapolation caution: the range of every numeric, log and power term the
// model uses (over the rows used, not the rows read), the largest leverage at unit weight
// (h_ii / w_i) and, for a logged response, the smearing factor (Duan 1983: the mean of
// exp(e_i) estimates E[exp(error)]).

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/diagnostics.h"
#include "stepledger/engine/fit.h"

namespace stepledger {

/// Range of one term's design value over the rows a model was fitted on.
struct TermRange {
  std::string term;    ///< design term name
  std::string column;  ///< its source column
  TermKind kind = TermKind::kNumeric;  ///< kNumeric, kLog or kPower
  double min = 0;      ///< of the design value: the value, its log, or its power
  double max = 0;
};

/// What the diagnostics pass of a run learns for pricing new rows (see the section above).
struct PredictionSupport {
  std::vector<TermRange> ranges;
  std::optional<double> max_unit_leverage;
  std::uint64_t max_unit_leverage_line = 0;
  std::size_t max_unit_leverage_file = 0;  ///< its file of a data set (UsedRow::file)
  std::optional<double> smearing_factor;
};

/// Terms a model needs evaluated: its terms and, recursively, the parts of its products.
/// Sorted design term indices.
std::vector<std::size_t> TermsNeededByModel(const Design& design, const FitResult& fit);

/// The diagnostics pass of a run's final model (ComputeDiagnostics, one pass over the rows)
/// that also learns the model's PredictionSupport: the term ranges, the largest unit leverage
/// (h_ii / w_i) and, with a logged response, the smearing factor, in the same pass (nothing kept
/// per row). options.row_observer, when set, sees every row as ComputeDiagnostics gives it.
DiagnosticsResult DiagnoseAndLearnSupport(const FitResult& fit, const Design& design,
                                          const RowReplay& replay, PredictionSupport& support,
                                          const DiagnosticsOptions& options = {});
/// The same over rows diagnosed wherever they lie (DiagnosingReplay: a shared run's processes
/// diagnose their own rows; everything kept is learnt here in record order: the same bits).
DiagnosticsResult DiagnoseAndLearnSupport(const FitResult& fit, const Design& design,
                                          const DiagnosingReplay& rows, PredictionSupport& support,
                                          const DiagnosticsOptions& options = {});

/// True for the term kinds whose design value has a range worth checking (numeric, log, power).
bool IsRangedKind(TermKind kind);

}  // namespace stepledger

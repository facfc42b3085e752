#pragma once
// Every row's diagnostic in file order, for tests that check them one by one (the product keeps
// only the bounded summary of engine/diagnostics.h).

#include <vector>

#include "stepledger/engine/diagnostics.h"

namespace stepledger::testing {

/// ComputeDiagnostics, collecting each row its observer sees; *summary receives the result.
inline std::vector<RowDiagnostic> DiagnoseEveryRow(const FitResult& fit, const Design& design, const RowReplay& replay,
                                                   DiagnosticsResult* summary = nullptr) {
  std::vector<RowDiagnostic> rows;
  DiagnosticsOptions options;
  options.row_observer = [&rows](const RowDiagnostic& row) { rows.push_back(row); };
  DiagnosticsResult result = ComputeDiagnostics(fit, design, replay, options);
  if (summary != nullptr) *summary = std::move(result);
  return rows;
}

}  // namespace stepledger::testing

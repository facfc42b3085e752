#include "stepledger/engine/model_support.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>

namespace stepledger {

bool IsRangedKind(TermKind kind) {
  return kind == TermKind::kNumeric || kind == TermKind::kLog || kind == TermKind::kPower;
}

std::vector<std::size_t> TermsNeededByModel(const Design& design, const FitResult& fit) {
  std::vector<bool> needed(design.terms.size(), false);
  std::vector<std::size_t> pending(fit.term_indices.begin(), fit.term_indices.end());
  while (!pending.empty()) {
    const std::size_t term = pending.back();
    pending.pop_back();
    if (term >= design.terms.size() || needed[term]) continue;
    needed[term] = true;
    // Only a product's parts are needed to evaluate it; a power's hierarchy parts are not.
    if (design.terms[term].kind == TermKind::kProduct) {
      pending.insert(pending.end(), design.terms[term].parts.begin(), design.terms[term].parts.end());
    }
  }
  std::vector<std::size_t> terms;
  for (std::size_t t = 0; t < needed.size(); ++t) {
    if (needed[t]) terms.push_back(t);
  }
  return terms;
}

DiagnosticsResult DiagnoseAndLearnSupport(const FitResult& fit, const Design& design,
                                          const RowReplay& replay, PredictionSupport& support,
                                          const DiagnosticsOptions& options) {
  return DiagnoseAndLearnSupport(fit, design, DiagnoseHere(replay), support, options);
}

DiagnosticsResult DiagnoseAndLearnSupport(const FitResult& fit, const Design& design,
                                          const DiagnosingReplay& rows, PredictionSupport& support,
                                          const DiagnosticsOptions& options) {
  support = PredictionSupport{};
  std::vector<std::size_t> ranged_terms, ranged_columns;
  for (std::size_t term : TermsNeededByModel(design, fit)) {
    if (!IsRangedKind(design.terms[term].kind)) continue;
    ranged_terms.push_back(term);
    ranged_columns.push_back(design.terms[term].first_column);
  }
  // ComputeDiagnostics folds the rows' diagnostics, which come in record order each with its
  // row's weight; the largest unit leverage and the smearing sum follow them on the way (nothing
  // kept per row), and the ranges come back with the rows' extents.
  double smearing_sum = 0;
  ColumnExtents extents(ranged_columns.size());
  const DiagnosingReplay learning = [&](const RowDiagnoser& diagnoser, std::span<const std::size_t>,
                                        const std::function<void(const RowDiagnostic&, double)>& visit) {
    extents = rows(diagnoser, ranged_columns, [&](const RowDiagnostic& row, double weight) {
      if (weight > 0) {
        const double unit_leverage = row.leverage / weight;
        if (!support.max_unit_leverage || unit_leverage > *support.max_unit_leverage) {
          support.max_unit_leverage = unit_leverage;
          support.max_unit_leverage_line = row.line;
          support.max_unit_leverage_file = row.file;
        }
      }
      smearing_sum += std::exp(std::sqrt(weight) * row.residual);
      visit(row, weight);
    });
    return extents;
  };
  DiagnosticsResult diagnostics = ComputeDiagnostics(fit, learning, options);

  if (diagnostics.rows > 0) {
    for (std::size_t i = 0; i < ranged_terms.size(); ++i) {
      const DesignTerm& term = design.terms[ranged_terms[i]];
      support.ranges.push_back({term.name, term.source_column, term.kind, extents.low[i], extents.high[i]});
    }
  }
  if (design.response_transform == ResponseTransform::kLog && diagnostics.rows > 0) {
    support.smearing_factor = smearing_sum / static_cast<double>(diagnostics.rows);
  }
  return diagnostics;
}

}  // namespace stepledger

#pragma once
// Comparing triangular factors in tests: R is unique up to row signs (made non-negative on the
// diagonal by the engine), so columns are compared against their own size.

#include <algorithm>

#include <armadillo>

namespace stepledger::testing {

/// Largest |a - b| in a column relative to that column's norm in b, over all columns.
inline double ColumnRelativeDifference(const arma::mat& a, const arma::mat& b) {
  double worst = 0;
  for (arma::uword j = 0; j < b.n_cols; ++j) {
    const double norm = arma::norm(b.col(j));
    if (norm > 0) worst = std::max(worst, arma::abs(a.col(j) - b.col(j)).max() / norm);
  }
  return worst;
}

}  // namespace stepledger::testing

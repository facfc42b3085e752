#pragma once
// Factors, designs and row replays from matrices held in memory, for tests that exercise the
// numerical engine without CSV files or plans.

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <armadillo>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/row_sums.h"

namespace stepledger::testing {

/// 2^-round(log2(max |v|)): the exact power of two that brings the largest magnitude near 1
/// (1 for an all-zero vector). The same rule the design expansion uses.
double PowerOfTwoScale(const arma::vec& values);
/// One scale per column of x, then the response's.
std::vector<double> PowerOfTwoScales(const arma::mat& x, const arma::vec& y);

/// Folds the rows of x (n x m, unscaled) with responses y and weights w (empty: all 1) into a
/// factor, block_rows rows per fold, with the given scales (empty: PowerOfTwoScales).
Factor BuildFactor(const arma::mat& x, const arma::vec& y, const arma::vec& w = {},
                   std::size_t block_rows = 256, std::vector<double> scales = {});

/// The fold of every row (row i is data record i): FoldOfRecord(seed, i, folds).
std::vector<std::size_t> FoldsOfRows(std::size_t rows, std::uint64_t seed, std::size_t folds);
/// One factor per fold (fold order), each folded from its rows only, with the given scales
/// (empty: PowerOfTwoScales of all rows): what a data pass with cross-validation gives.
std::vector<Factor> BuildFoldFactors(const arma::mat& x, const arma::vec& y, const arma::vec& w,
                                     const std::vector<std::size_t>& fold_of_row, std::size_t folds,
                                     std::vector<double> scales = {});
/// The brute-force k-fold error: for each fold f, least squares (sqrt(w)-weighted, LAPACK
/// through arma::solve, return checked) on the other folds' rows over the given columns, then
/// sum over fold f's rows of w_i (y_i - x_i' beta)^2. nullopt when some training fit fails
/// (rank-deficient). No columns: the prediction is 0.
std::optional<std::vector<double>> BruteForceFoldSse(const arma::mat& x, const arma::vec& y,
                                                     const arma::vec& w,
                                                     const std::vector<std::size_t>& fold_of_row,
                                                     std::size_t folds,
                                                     const std::vector<std::size_t>& columns);

/// A RowReplay over the rows in memory, in the given order (row_index = position, line = +2).
/// x_low (optional, same shape as x): low-order parts of the design values (UsedRow::x_low).
RowReplay MemoryRowReplay(const arma::mat& x, const arma::vec& y, const arma::vec& w = {},
                          const arma::mat& x_low = {});

/// A SummingReplay (engine/row_sums.h) over the rows in memory cut into parts [cuts[i],
/// cuts[i + 1]) (cuts ascending from 0 to the row count; a part may be empty): each part summed
/// by its own kernel, the parts' sums added in order through the bytes processes exchange — what
/// a run shared by processes does. Checks each part's row count; *parts_summed (when given)
/// counts the kernels run.
SummingReplay PartedSummingReplay(const arma::mat& x, const arma::vec& y, const arma::vec& w, const arma::mat& x_low,
                                  std::vector<arma::uword> cuts, int* parts_summed = nullptr);

/// A hand-built design: column 0 "intercept" when intercept is true, then the terms in order,
/// each (name, number of columns); a term of one column names its column after itself, a term
/// of d > 1 columns names them name[1]..name[d]. scales: one per design column then the
/// response (DesignColumn::scale and Design::response_scale).
Design MakeDenseDesign(bool intercept, const std::vector<std::pair<std::string, std::size_t>>& terms,
                       const std::vector<double>& scales);

/// Every term index of a design, in order.
std::vector<std::size_t> AllTerms(const Design& design);

}  // namespace stepledger::testing

#pragma once
// The shared fitting kernel: an ordered model state on the factor R of [X | y].
//
// With the model's columns S first, the reordered factor is
//     [[R11 R12 r1y] [0 R22 r2y] [0 0 rho]]
// and RSS(S) = ||r2y||^2 + rho^2. Everything a selection needs comes from R alone:
//  - adding one candidate column j scores as RSS - (R22[:,j]' r2y)^2 / ||R22[:,j]||^2, so all
//    candidates score in O(m^2); a group of d columns (a categorical term) scores with a small
//    QR of its d columns of R22, O(m d^2);
//  - removing model columns G raises RSS by beta_G' [C_GG]^-1 beta_G, C = (R11'R11)^-1; the
//    kernel evaluates it without forming C, by rotating G to the end of the model in a copy
//    of R and reading the freed entries of r1y (O(m^2 d), no inverse, no cancellation);
//  - moving a column into or out of S is a sequence of Givens rotations on R (LAPACK dlartg,
//    BLAS drot), O(m^2) per column.
// A column is aliased with the model when the norm of its part orthogonal to the model
// (in R22) is below alias_tolerance times its own norm; aliased columns are never added.
//
// Scores and RSS are in the data's units (the factor's power-of-two scales are undone).

#include <cstddef>
#include <optional>
#include <span>
#include <vector>

#include <armadillo>

#include "stepledger/engine/factor.h"

namespace stepledger {

struct KernelOptions {
  /// Relative residual norm below which a column counts as aliased with the model:
  /// ||part of x_j orthogonal to the model|| < alias_tolerance * ||x_j|| (weighted norms).
  /// Default 1e-10: far above rounding (about 1e-15 for an exact dependence) and below the
  /// 5e-8 of the most collinear certified data set (NIST StRD Filip, degree-10 polynomial).
  double alias_tolerance = 1e-10;
  /// Throws InputError naming the field when out of (0, 1).
  void Validate() const;
};

/// Outcome of scoring a change of the model by one group of columns.
struct GroupScore {
  double rss = 0;              ///< RSS of the model after the change (data units)
  /// How much the change moves the RSS: the drop when adding, the rise when removing (data
  /// units, >= 0). Formed directly from the factor (the squared components of the response
  /// along the group's directions), never as the difference of two RSS, which loses the
  /// drop's digits when it is small beside the RSS (a term of no effect among millions of rows:
  /// its partial F would then follow the rounding of the factor, e.g. the thread count).
  double rss_change = 0;
  std::size_t df = 0;          ///< columns added or removed
  bool aliased = false;        ///< adding: some column of the group is aliased (rss unset)
  std::vector<std::size_t> aliased_columns;  ///< which ones
  /// Adding: smallest relative residual norm among the group's columns, after projecting
  /// each on the model and the group's earlier columns (1 = orthogonal, 0 = dependent).
  double min_relative_norm = 1;
};

/// Coefficients of the current model.
struct ModelSolution {
  std::vector<std::size_t> columns;  ///< model columns in model order
  arma::vec beta;                    ///< data units, same order
  arma::mat xtwx_inverse;            ///< (X_S' W X_S)^-1 in data units
  double rss = 0;
  double rcond = 0;                  ///< reciprocal condition number of R11 (LAPACK dtrcon, 1-norm)
};

class ModelState {
 public:
  /// Starts from the empty model. The factor must outlive nothing: it is copied.
  explicit ModelState(const Factor& factor, KernelOptions options = {});

  std::size_t column_count() const { return columns_; }
  const KernelOptions& options() const { return options_; }
  /// Model columns in model order.
  const std::vector<std::size_t>& model_columns() const { return model_; }
  bool Contains(std::size_t column) const;

  /// RSS of the current model (data units). O(m).
  double Rss() const;
  /// Total weighted sum of squares of y about zero (the RSS of the empty model).
  double TotalSumOfSquaresAboutZero() const { return rss_empty_; }

  /// ||part of x_j orthogonal to the model|| / ||x_j||; 0 for a zero column. O(m).
  double RelativeResidualNorm(std::size_t column) const;
  bool IsAliased(std::size_t column) const;

  /// Scores adding the group (columns not in the model), without changing the state.
  GroupScore ScoreAdd(std::span<const std::size_t> columns) const;
  /// Scores adding each single column not in the model at once: entry j scores adding column j
  /// alone, as ScoreAdd would (nullopt for model columns and aliased columns). O(m^2) in all.
  std::vector<std::optional<GroupScore>> ScoreAllSingleAdds() const;
  /// Scores removing the group (columns in the model), without changing the state.
  GroupScore ScoreRemove(std::span<const std::size_t> columns) const;

  /// Adds the columns in order. Returns false and leaves the state as it was when one of
  /// them is aliased with the model (and the group's earlier columns).
  bool Add(std::span<const std::size_t> columns);
  /// Removes the columns (which must be in the model).
  void Remove(std::span<const std::size_t> columns);

  /// Coefficients and (X'WX)^-1 of the model from R11 alone (no refinement). O(s^3).
  /// Throws NumericalError if R11 has an exact zero on its diagonal (cannot happen for models
  /// built with Add, which refuses aliased columns).
  ModelSolution Solve() const;

  /// R11 of the current model (s x s, upper triangular, model order) in the factor's scaled
  /// units: R11'R11 = D X_S' W X_S D with D = diag(scales of the model columns).
  arma::mat ModelTriangle() const;
  /// Scales of the factor's columns (design columns then the response), see Factor::scales.
  const std::vector<double>& scales() const { return scales_; }

  // Programmer errors (a column index out of range, adding a model column, removing a
  // column that is not in the model, repeating a column in a group) throw std::logic_error.

 private:
  void MoveColumn(std::size_t from_position, std::size_t to_position);
  void SwapAdjacent(std::size_t position);           // positions position, position+1
  // Adding one column that is not aliased (relative_norm: its RelativeResidualNorm), data units.
  GroupScore SingleAddScore(std::size_t column, double relative_norm) const;
  double RssScaled() const;
  void CheckColumn(std::size_t column, const char* caller) const;
  std::size_t columns_;        // m
  KernelOptions options_;
  arma::mat r_;                // (m+1)x(m+1) triangle, columns permuted by position_to_column_
  std::vector<std::size_t> position_to_column_;  // position -> design column (last = y)
  std::vector<std::size_t> column_position_;     // design column -> position
  std::vector<double> scales_;  // per design column then y
  std::vector<double> column_norm_;  // ||x_j|| in factor scale
  std::vector<std::size_t> model_;
  double rss_empty_ = 0;
};

}  // namespace stepledger

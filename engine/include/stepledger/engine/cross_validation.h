#pragma once
// k-fold cross-validation from per-fold factors, with no row read again.
//
// The factor pass folds each used row into the factor of its fold (engine/resampling.h), each
// factor holding the response column too. The training factor of fold f is the merge of the
// other folds' factors; a model's coefficients beta_{-f} come from it, and the held-out weighted
// squared error on fold f is ||R_f [beta_{-f}; -1]||^2 over the model's columns and the
// response, from fold f's own triangle R_f (R_f'R_f = [X_f y_f]' W_f [X_f y_f]).
//
// The cross-validated error of a model is
//     cv = sqrt( sum_f sse_f / sum_i w_i )
// over the used rows (held-out rows are in no fold); lower is better.

#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include <armadillo>

#include "stepledger/engine/factor.h"
#include "stepledger/engine/kernel.h"

namespace stepledger {

/// The cross-validated error of one model.
struct FoldErrors {
  /// Held-out weighted SSE per fold (fold order, data units). Empty when undefined.
  std::vector<double> sse;
  /// sqrt(sum(sse) / weight_sum); unset when some fold's training rows cannot fit the model.
  std::optional<double> rmse;
  /// Why rmse is unset, e.g. "column 5 is aliased in the training rows of fold 3 (...)"; the
  /// engine knows column indices only, so a caller with the design names the column itself from
  /// aliased_column.
  std::string undefined_reason;
  /// When a column is aliased in some fold's training rows: the first fold (0-based) where one
  /// is, the first aliased column there (design index, in the order given to Evaluate: each
  /// column is projected on the ones before it) and its relative residual norm.
  std::optional<std::size_t> aliased_column;
  std::size_t aliased_fold = 0;
  double aliased_relative_norm = 0;
};

class CrossValidation {
 public:
  /// fold_factors: one per fold, fold order, all of one design (same scales). The training
  /// triangles (merges of the other folds) are made here, once, from prefix and suffix merges:
  /// 3 (k - 2) merges of O((m+1)^3) each. Throws std::invalid_argument for fewer than kMinFolds
  /// factors or factors of different designs, InputError for invalid kernel options.
  explicit CrossValidation(std::vector<Factor> fold_factors, KernelOptions kernel = {});

  std::size_t folds() const { return folds_.size(); }
  const KernelOptions& kernel() const { return kernel_; }
  const Factor& fold(std::size_t f) const { return folds_[f]; }
  /// The training factor of fold f (every other fold merged).
  const Factor& training(std::size_t f) const { return training_[f]; }
  /// Rows and weight of every fold together.
  std::uint64_t rows() const;
  double weight_sum() const;

  /// Errors of the model with these design columns (any order; none: the model with no
  /// coefficients, which predicts 0). A column aliased with the others in some fold's training
  /// rows (relative residual norm below kernel.alias_tolerance) makes rmse undefined. A fold with
  /// no rows contributes sse 0; rmse is also unset when no fold has any weight. Each fold
  /// re-triangularises the training triangle's columns S and y (LAPACK dgeqrf),
  /// O(k (m+1) s^2) for s columns. A column index out of range or repeated throws
  /// std::logic_error.
  FoldErrors Evaluate(std::span<const std::size_t> columns) const;

 private:
  std::vector<Factor> folds_;
  std::vector<Factor> training_;
  KernelOptions kernel_;
};

}  // namespace stepledger

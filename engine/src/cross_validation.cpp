#include "stepledger/engine/cross_validation.h"

#include <cmath>
#include <stdexcept>
#include <string>

#include "lapack.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/resampling.h"

namespace stepledger {
namespace {

void CheckSameDesign(const std::vector<Factor>& folds) {
  if (folds.size() < kMinFolds) {
    throw std::invalid_argument("CrossValidation: " + std::to_string(folds.size()) +
                                " fold factors; cross-validation needs at least " +
                                std::to_string(kMinFolds));
  }
  const Factor& first = folds.front();
  const std::size_t width = first.scales.size();
  for (std::size_t f = 0; f < folds.size(); ++f) {
    const Factor& fold = folds[f];
    if (fold.scales != first.scales || fold.r.n_rows != width || fold.r.n_cols != width) {
      throw std::invalid_argument("CrossValidation: the factor of fold " + std::to_string(f) +
                                  " is not of the design of fold 0 (other scales or size)");
    }
  }
}

}  // namespace

CrossValidation::CrossValidation(std::vector<Factor> fold_factors, KernelOptions kernel)
    : folds_(std::move(fold_factors)), kernel_(kernel) {
  kernel_.Validate();
  CheckSameDesign(folds_);
  // Training factor of fold f = folds 0..f-1 merged with folds f+1..k-1. Prefix and suffix
  // merges share their work: 3 (k - 2) merges in all instead of k (k - 2).
  const std::size_t k = folds_.size();
  std::vector<Factor> prefix(k);  // prefix[f]: folds 0..f-1 (f >= 1)
  std::vector<Factor> suffix(k);  // suffix[f]: folds f+1..k-1 (f <= k-2)
  prefix[1] = folds_[0];
  for (std::size_t f = 2; f < k; ++f) prefix[f] = MergeFactors(prefix[f - 1], folds_[f - 1]);
  suffix[k - 2] = folds_[k - 1];
  for (std::size_t f = k - 2; f-- > 0;) suffix[f] = MergeFactors(folds_[f + 1], suffix[f + 1]);
  training_.reserve(k);
  for (std::size_t f = 0; f < k; ++f) {
    if (f == 0) training_.push_back(std::move(suffix[0]));
    else if (f == k - 1) training_.push_back(std::move(prefix[k - 1]));
    else training_.push_back(MergeFactors(prefix[f], suffix[f]));
  }
}

std::uint64_t CrossValidation::rows() const {
  std::uint64_t total = 0;
  for (const Factor& fold : folds_) total += fold.rows;
  return total;
}

double CrossValidation::weight_sum() const {
  double total = 0;
  for (const Factor& fold : folds_) total += fold.weight_sum;
  return total;
}

FoldErrors CrossValidation::Evaluate(std::span<const std::size_t> columns) const {
  const std::size_t m = folds_.front().column_count();
  const std::size_t s = columns.size();
  std::vector<char> seen(m, 0);
  arma::uvec picked(s + 1);
  for (std::size_t j = 0; j < s; ++j) {
    if (columns[j] >= m || seen[columns[j]]) {
      throw std::logic_error("CrossValidation::Evaluate: column " + std::to_string(columns[j]) +
                             (columns[j] >= m ? " is out of range" : " is repeated"));
    }
    seen[columns[j]] = 1;
    picked(j) = columns[j];
  }
  picked(s) = m;  // the response
  const double response_scale = folds_.front().scales.back();
  const arma::uvec model_columns = picked.head(s);
  const int height = static_cast<int>(m + 1);
  const int width = static_cast<int>(s + 1);

  FoldErrors errors;
  std::vector<double> sse(folds_.size(), 0.0);
  for (std::size_t f = 0; f < folds_.size(); ++f) {
    arma::vec beta;  // scaled units: R[:, S] beta approximates R[:, y]
    if (s > 0) {
      // [R_S r_y] of the training triangle is (m+1) x (s+1) and dense; its own QR gives the
      // triangle of the model's columns and the response, with R_S's column norms kept.
      arma::mat block = training_[f].r.cols(picked);
      arma::vec norms(s);
      for (std::size_t j = 0; j < s; ++j) norms(j) = arma::norm(block.col(j));
      lapack::HouseholderQr(height, width, block.memptr(), height);
      // Aliasing as the kernel defines it: the part of column j orthogonal to the earlier
      // columns (|R(j, j)|) against the column's own norm; a zero column counts as aliased.
      for (std::size_t j = 0; j < s; ++j) {
        const double relative = norms(j) == 0 ? 0.0 : std::fabs(block(j, j)) / norms(j);
        if (relative < kernel_.alias_tolerance) {
          errors.aliased_column = columns[j];
          errors.aliased_fold = f;
          errors.aliased_relative_norm = relative;
          errors.undefined_reason =
              "column " + std::to_string(columns[j]) + " is aliased in the training rows of fold " +
              std::to_string(f) + " (folds counted from 0): relative norm " + FormatQuantity(relative, 6) +
              " after projection on the model's earlier columns, below alias_tolerance " +
              FormatQuantity(kernel_.alias_tolerance, 6);
          return errors;
        }
      }
      beta = block.submat(0, s, s - 1, s);
      const int info = lapack::SolveUpperTriangular(false, static_cast<int>(s), 1, block.memptr(), height,
                                                    beta.memptr(), static_cast<int>(s));
      if (info != 0) {
        throw std::logic_error("CrossValidation::Evaluate: zero pivot after the aliasing check");
      }
    }
    // Held-out error from fold f's own triangle: ||R_f [beta; -1]||^2, then the response's
    // power-of-two scale undone (the design columns' scales cancel inside beta).
    const Factor& fold = folds_[f];
    arma::vec residual = -fold.r.col(m);
    if (s > 0) residual += fold.r.cols(model_columns) * beta;
    sse[f] = arma::dot(residual, residual) / (response_scale * response_scale);
  }
  const double total_weight = weight_sum();
  if (!(total_weight > 0)) {
    errors.undefined_reason = "no rows in any fold";
    return errors;
  }
  double total = 0;
  for (double value : sse) total += value;
  errors.rmse = std::sqrt(total / total_weight);
  errors.sse = std::move(sse);
  return errors;
}

}  // namespace stepledger

#include "stepledger/engine/factor.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <stdexcept>
#include <string>

#include "lapack.h"
#include "stepledger/engine/errors.h"

namespace stepledger {

// ---- RunningStats -------------------------------------------------------------------------
// Welford's update for one value; Chan, Golub and LeVeque (1979) for two partial results:
// m2 = m2_a + m2_b + delta^2 n_a n_b / n. Both avoid the cancellation of sum-of-squares formulas.

void RunningStats::Add(double value) {
  if (count == 0) {
    min = max = value;
  } else {
    min = std::min(min, value);
    max = std::max(max, value);
  }
  ++count;
  const double delta = value - mean;
  mean += delta / static_cast<double>(count);
  m2 += delta * (value - mean);
}

void RunningStats::Merge(const RunningStats& other) {
  if (other.count == 0) return;
  if (count == 0) {
    *this = other;
    return;
  }
  const double n_a = static_cast<double>(count);
  const double n_b = static_cast<double>(other.count);
  const double n = n_a + n_b;
  const double delta = other.mean - mean;
  mean += delta * (n_b / n);
  m2 += other.m2 + delta * delta * (n_a * n_b / n);
  min = std::min(min, other.min);
  max = std::max(max, other.max);
  count += other.count;
}

double RunningStats::sd() const {
  if (count < 2) return 0;
  return std::sqrt(std::max(0.0, m2) / static_cast<double>(count - 1));
}

// ---- FactorBuilder ------------------------------------------------------------------------

namespace {

// Makes R's diagonal non-negative by flipping whole rows: R^T R is unchanged, and the factor of a
// full-rank matrix with a non-negative diagonal is unique, so every chunking and merge order
// agrees to rounding.
void MakeDiagonalNonNegative(arma::mat& r) {
  for (arma::uword row = 0; row < r.n_rows; ++row) {
    if (r(row, row) < 0) r.row(row) *= -1.0;
  }
}

// Folds the triangle `other` (same size) into `r`: dtpqrt with a triangular pentagon (l = n).
void FoldTriangle(arma::mat& r, const arma::mat& other) {
  assert(r.n_rows == other.n_rows && r.n_cols == other.n_cols);
  arma::mat b = arma::trimatu(other);  // dtpqrt overwrites B; the strict lower part must be zero
  const int n = static_cast<int>(r.n_cols);
  lapack::FoldPentagonal(n, n, n, r.memptr(), n, b.memptr(), n);
}

}  // namespace

FactorBuilder::FactorBuilder(std::vector<double> scales, std::size_t block_rows, bool keep_column_stats)
    : scales_(std::move(scales)), columns_(scales_.size()), block_rows_(block_rows),
      keep_column_stats_(keep_column_stats) {
  if (columns_ == 0) throw std::invalid_argument("FactorBuilder: scales must hold at least the response's");
  if (block_rows_ == 0) throw std::invalid_argument("FactorBuilder: block_rows must be at least 1");
  for (double scale : scales_) {
    int exponent = 0;
    if (!(scale > 0) || !std::isfinite(scale) || std::frexp(scale, &exponent) != 0.5) {
      throw std::invalid_argument("FactorBuilder: every scale must be an exact power of two, got " +
                                  std::to_string(scale));
    }
  }
  r_.zeros(columns_, columns_);
  block_.zeros(block_rows_, columns_);
  if (keep_column_stats_) stats_.resize(columns_);
}

void FactorBuilder::AddRow(std::span<const double> x, double y, double weight) { AddRepeatedRow(x, y, weight, 1); }

void FactorBuilder::AddRepeatedRow(std::span<const double> x, double y, double weight, unsigned copies) {
  if (x.size() + 1 != columns_) {
    throw std::invalid_argument("FactorBuilder::AddRow: expected " + std::to_string(columns_ - 1) +
                                " design values, got " + std::to_string(x.size()));
  }
  if (copies == 0) throw std::invalid_argument("FactorBuilder::AddRepeatedRow: copies must be at least 1");
  if (!(weight > 0) || !std::isfinite(weight)) {
    throw NumericalError("factor: weight of used row " + std::to_string(rows_ + 1) +
                         " is not a positive finite number (" + std::to_string(weight) + ")");
  }
  const double root_weight = std::sqrt(weight * copies);  // exact for one copy: weight * 1 == weight
  const std::size_t last = columns_ - 1;
  for (std::size_t column = 0; column < columns_; ++column) {
    const double value = column < last ? x[column] : y;
    if (!std::isfinite(value)) {
      throw NumericalError("factor: used row " + std::to_string(rows_ + 1) + " has a non-finite " +
                           (column < last ? "value in design column " + std::to_string(column)
                                          : std::string("response")));
    }
    block_(pending_, column) = root_weight * (value * scales_[column]);
    if (keep_column_stats_) {
      for (unsigned copy = 0; copy < copies; ++copy) stats_[column].Add(value);
    }
  }
  ++pending_;
  rows_ += copies;
  weight_sum_ += weight * copies;
  log_weight_sum_ += copies * std::log(weight);
  if (pending_ == block_rows_) FoldPending();
}

void FactorBuilder::FoldPending() {
  if (pending_ == 0) return;
  const int n = static_cast<int>(columns_);
  // dtpqrt with l = 0: the first `pending_` rows of the block are a dense pentagon.
  lapack::FoldPentagonal(static_cast<int>(pending_), n, 0, r_.memptr(), n, block_.memptr(),
                         static_cast<int>(block_rows_));
  pending_ = 0;
}

void FactorBuilder::Merge(FactorBuilder&& other) {
  if (other.columns_ != columns_ || other.scales_ != scales_) {
    throw std::invalid_argument("FactorBuilder::Merge: builders of different designs");
  }
  other.FoldPending();
  FoldTriangle(r_, other.r_);
  rows_ += other.rows_;
  weight_sum_ += other.weight_sum_;
  log_weight_sum_ += other.log_weight_sum_;
  if (keep_column_stats_ != other.keep_column_stats_) {
    throw std::invalid_argument("FactorBuilder::Merge: one builder keeps column statistics, the other not");
  }
  for (std::size_t column = 0; column < stats_.size(); ++column) stats_[column].Merge(other.stats_[column]);
  other.r_.zeros();
  other.rows_ = 0;
  other.weight_sum_ = other.log_weight_sum_ = 0;
  other.stats_.assign(other.stats_.size(), RunningStats{});
}

Factor FactorBuilder::Finish() {
  FoldPending();
  Factor factor;
  factor.r = arma::trimatu(r_);
  MakeDiagonalNonNegative(factor.r);
  factor.scales = scales_;
  factor.rows = rows_;
  factor.weight_sum = weight_sum_;
  factor.log_weight_sum = log_weight_sum_;
  factor.column_stats = stats_;
  return factor;
}

Factor MergeFactors(const Factor& a, const Factor& b) {
  if (a.scales != b.scales || a.r.n_rows != b.r.n_rows || a.r.n_cols != b.r.n_cols) {
    throw std::invalid_argument("MergeFactors: factors of different designs");
  }
  if (a.column_stats.size() != b.column_stats.size()) {
    throw std::invalid_argument("MergeFactors: one factor keeps column statistics, the other not");
  }
  Factor merged = a;
  FoldTriangle(merged.r, b.r);
  merged.r = arma::trimatu(merged.r);
  MakeDiagonalNonNegative(merged.r);
  merged.rows += b.rows;
  merged.weight_sum += b.weight_sum;
  merged.log_weight_sum += b.log_weight_sum;
  for (std::size_t column = 0; column < merged.column_stats.size(); ++column) {
    merged.column_stats[column].Merge(b.column_stats[column]);
  }
  return merged;
}

}  // namespace stepledger

#pragma once
// The one-pass triangular factor of the weighted, scaled augmented matrix [X | y].
//
// Rows are buffered in blocks and folded into the (m+1)x(m+1) upper-triangular R with
// LAPACK's triangular-pentagonal QR (dtpqrt): Householder accuracy at BLAS-3 speed and
// never the normal equations (they square the condition number). Two factors merge the
// same way, so chunks, threads, processes and folds reduce alike. Memory is O(m^2 + block
// rows x m), independent of the number of rows.
//
// Each row is multiplied by sqrt(w) (precision weights) and each column by an exact power
// of two (Design::scales), which changes no rounding but keeps magnitudes near 1 for the
// rank tolerance. R's diagonal is made non-negative so that any chunking gives the same R
// to rounding.

#include <cstdint>
#include <span>
#include <vector>

#include <armadillo>

namespace stepledger {

/// Mergeable running statistics (Chan, Golub and LeVeque's pairwise update of Welford's
/// mean and sum of squared deviations). Unweighted, over used rows.
struct RunningStats {
  std::uint64_t count = 0;
  double min = 0, max = 0, mean = 0, m2 = 0;
  void Add(double value);
  void Merge(const RunningStats& other);
  /// Sample standard deviation (n-1); 0 when count < 2.
  double sd() const;
};

struct Factor {
  /// (m+1)x(m+1) upper triangular, columns: design columns then the response, all scaled.
  arma::mat r;
  /// Scales of the columns of r (design columns then response): r describes X*diag(scale).
  std::vector<double> scales;
  std::uint64_t rows = 0;        ///< rows folded (used rows)
  double weight_sum = 0;         ///< sum of weights of those rows
  double log_weight_sum = 0;     ///< sum of ln(weight) of those rows (for the log-likelihood)
  /// Unscaled design columns then the response; empty when the builder kept none.
  std::vector<RunningStats> column_stats;
  std::size_t column_count() const { return scales.empty() ? 0 : scales.size() - 1; }
};

/// Folds rows into a factor. Not thread-safe; give each thread its own and Merge them.
class FactorBuilder {
 public:
  /// scales: one per design column then one for the response (exact powers of two).
  /// block_rows: rows buffered before each dtpqrt fold (>= 1); affects speed, not results
  /// beyond rounding.
  /// keep_column_stats: whether to keep the running statistics of every column
  /// (Factor::column_stats, left empty when not): the bootstrap's replicate factors skip them,
  /// as nothing reads them there and they would cost as much as the fold itself.
  explicit FactorBuilder(std::vector<double> scales, std::size_t block_rows = 256,
                         bool keep_column_stats = true);

  /// Adds one row: x are the unscaled design values, weight > 0.
  void AddRow(std::span<const double> x, double y, double weight);
  /// Adds `copies` (>= 1) copies of one row at once, as the Poisson bootstrap draws them: one
  /// row of the block scaled by sqrt(weight * copies) (the same R'R as the copies), counted as
  /// `copies` rows of weight `weight` (rows, weight_sum, log_weight_sum and the statistics).
  void AddRepeatedRow(std::span<const double> x, double y, double weight, unsigned copies);
  /// Folds another builder's rows (its pending block included) into this one.
  void Merge(FactorBuilder&& other);
  /// Folds the pending block and returns the factor (diagonal made non-negative).
  Factor Finish();

 private:
  void FoldPending();
  std::vector<double> scales_;
  std::size_t columns_;   // m + 1
  std::size_t block_rows_;
  arma::mat r_;           // current triangle
  arma::mat block_;       // block_rows_ x columns_, column-major
  std::size_t pending_ = 0;
  std::uint64_t rows_ = 0;
  double weight_sum_ = 0;
  double log_weight_sum_ = 0;
  std::vector<RunningStats> stats_;
  bool keep_column_stats_ = true;
};

/// Merges two finished factors of the same design (any order gives the same R to rounding).
Factor MergeFactors(const Factor& a, const Factor& b);

}  // namespace stepledger

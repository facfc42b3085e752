#include "refine.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <utility>

#include "double_double.h"
#include "lapack.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/share_exchange.h"

namespace stepledger::detail {
namespace {

using dd::DoubleDouble;

// ---- the per-row sums of a pass ------------------------------------------------------------
// Rows are gathered into blocks of kBlockRows, stored column by column (structure of arrays),
// so that every step below is one loop over the rows of a block that the compiler vectorises
// with the instructions of the baseline x86-64 (SSE2: no fused multiply-add). Products are
// Dekker's: each factor is split once into halves of 26 bits whose products are exact, so that
// a b = p + e exactly with p = fl(a b). Sums are Ogita-Rump-Oishi's Sum2 in kLanes lanes (row
// i of every block goes to lane i mod kLanes): s += t with TwoSum, the rounding errors and the
// products' low parts summed in c; the lanes are added in double-double at the end of the
// pass. The result is as accurate as a sum in twice the working precision, and the order of
// every operation is fixed by the source, so the bits do not depend on the instruction set.
// This file is compiled with -ffp-contract=off: a fused multiply-add in Dekker's product or
// TwoSum would change the roundings they rely on.

constexpr std::size_t kBlockRows = 64;
constexpr std::size_t kLanes = 8;
constexpr double kSplitter = 134217729.0;  // 2^27 + 1 (Veltkamp)

// a = hi + lo, both with at most 26 significant bits (exact; no overflow in scaled units).
inline void Split(const double* __restrict a, double* __restrict hi, double* __restrict lo) {
  for (std::size_t i = 0; i < kBlockRows; ++i) {
    const double c = kSplitter * a[i];
    const double h = c - (c - a[i]);
    hi[i] = h;
    lo[i] = a[i] - h;
  }
}

// (a + a_low)(b + b_low) = p + e to about twice the working precision: p + e' = a b exactly
// (Dekker), and e = e' + a b_low + a_low b (the low parts' product is below the rounding of
// the result and left out). ah/al, bh/bl: the splits of a and b.
inline void Product(const double* __restrict a, const double* __restrict ah, const double* __restrict al,
                    const double* __restrict a_low, const double* __restrict b, const double* __restrict bh,
                    const double* __restrict bl, const double* __restrict b_low, double* __restrict p,
                    double* __restrict e) {
  for (std::size_t i = 0; i < kBlockRows; ++i) {
    const double product = a[i] * b[i];
    const double error = (((ah[i] * bh[i] - product) + ah[i] * bl[i]) + al[i] * bh[i]) + al[i] * bl[i];
    p[i] = product;
    e[i] = error + (a[i] * b_low[i] + a_low[i] * b[i]);
  }
}

// Lanes of one sum: s[0..kLanes) then c[0..kLanes). Adds p[i] + e[i] for the block's rows.
// (Copies of the lanes in locals and an unrolled lane loop: GCC then keeps them in registers
// and vectorises across the lanes.)
inline void Accumulate(double* __restrict lanes, const double* __restrict p, const double* __restrict e) {
  double s[kLanes], c[kLanes];
  for (std::size_t l = 0; l < kLanes; ++l) {
    s[l] = lanes[l];
    c[l] = lanes[kLanes + l];
  }
  for (std::size_t g = 0; g < kBlockRows; g += kLanes) {
#pragma GCC unroll 8
    for (std::size_t l = 0; l < kLanes; ++l) {
      const double t = p[g + l];
      const double sum = s[l] + t;
      const double bb = sum - s[l];
      c[l] += ((s[l] - (sum - bb)) + (t - bb)) + e[g + l];
      s[l] = sum;
    }
  }
  for (std::size_t l = 0; l < kLanes; ++l) {
    lanes[l] = s[l];
    lanes[kLanes + l] = c[l];
  }
}

DoubleDouble Reduce(const double* lanes) {
  DoubleDouble total;
  for (std::size_t l = 0; l < kLanes; ++l) total = total + dd::TwoSum(lanes[l], lanes[kLanes + l]);
  return total;
}

// Where each sum of a pass sits in its RowSums (and its lanes): rss, the totals, the Gram's upper
// triangle by rows, then the gradient.
struct SumLayout {
  static constexpr std::size_t kRss = 0, kWeightSum = 1, kShiftedSum = 2, kShiftedSquares = 3, kFirstGram = 4;
  std::size_t k = 0;
  bool gram = false;
  std::size_t GramEntry(std::size_t i, std::size_t j) const {  // i <= j
    return kFirstGram + i * k - i * (i + 1) / 2 + j;
  }
  std::size_t FirstGradient() const { return kFirstGram + (gram ? k * (k + 1) / 2 : 0); }
  std::size_t Count() const { return FirstGradient() + k; }
};

// One pass: r = y - X b per row and the sums over the rows of X'W r and W r^2; with totals
// also sum w, sum w (y - shift) and sum w (y - shift)^2; with gram also X'WX (upper triangle).
class PassKernel final : public RowSumKernel {
 public:
  explicit PassKernel(RefinePass pass)
      : pass_(std::move(pass)), k_(pass_.columns.size()), layout_{k_, pass_.gram},
        x_(k_ * kBlockRows), x_low_(k_ * kBlockRows), x_hi_(k_ * kBlockRows), x_lo_(k_ * kBlockRows),
        u_(pass_.gram ? 4 * k_ * kBlockRows : 0), lanes_(layout_.Count() * 2 * kLanes, 0.0) {
    if (pass_.column_scales.size() != k_ || pass_.beta.size() != k_) {
      throw std::invalid_argument("refinement pass: columns, scales and estimates differ in number");
    }
    beta_.resize(k_);
    for (std::size_t j = 0; j < k_; ++j) {
      const double b = pass_.beta[j];
      const double c = kSplitter * b;
      const double h = c - (c - b);
      beta_[j] = {b, h, b - h};
    }
  }

  void Add(const UsedRow& row) {
    ++rows_;
    const bool has_low = !row.x_low.empty();
    for (std::size_t j = 0; j < k_; ++j) {
      const std::size_t column = pass_.columns[j];
      // Scaling by a power of two is exact.
      x_[j * kBlockRows + filled_] = row.x[column] * pass_.column_scales[j];
      x_low_[j * kBlockRows + filled_] = has_low ? row.x_low[column] * pass_.column_scales[j] : 0.0;
    }
    y_[filled_] = row.y * pass_.y_scale;
    w_[filled_] = row.weight;
    if (++filled_ == kBlockRows) ProcessBlock();
  }

  // Pads the last block with rows of weight 0 and values 0 (their terms are exact zeros), then
  // reduces every sum's lanes to one double-double value.
  RowSums Finish() override {
    if (filled_ > 0) {
      for (std::size_t i = filled_; i < kBlockRows; ++i) {
        for (std::size_t j = 0; j < k_; ++j) x_[j * kBlockRows + i] = x_low_[j * kBlockRows + i] = 0;
        y_[i] = w_[i] = 0;
      }
      ProcessBlock();
    }
    RowSums sums;
    sums.rows = rows_;
    for (std::size_t sum = 0; sum < layout_.Count(); ++sum) {
      const DoubleDouble value = Reduce(Lanes(sum));
      sums.hi.push_back(value.hi);
      sums.lo.push_back(value.lo);
    }
    return sums;
  }

 private:
  struct SplitValue {
    double value, hi, lo;
  };
  double* Lanes(std::size_t sum) { return lanes_.data() + sum * 2 * kLanes; }
  const double* Lanes(std::size_t sum) const { return lanes_.data() + sum * 2 * kLanes; }

  double* X(std::size_t j) { return x_.data() + j * kBlockRows; }
  double* XLow(std::size_t j) { return x_low_.data() + j * kBlockRows; }
  double* XHi(std::size_t j) { return x_hi_.data() + j * kBlockRows; }
  double* XLo(std::size_t j) { return x_lo_.data() + j * kBlockRows; }

  void ProcessBlock() {
    constexpr std::size_t B = kBlockRows;
    filled_ = 0;
    for (std::size_t j = 0; j < k_; ++j) Split(X(j), XHi(j), XLo(j));

    // r = y - sum_j (x_j + x_low_j) b_j: a running TwoSum per row, the errors summed in c.
    double s[B], c[B];
    for (std::size_t i = 0; i < B; ++i) {
      s[i] = y_[i];
      c[i] = 0;
    }
    for (std::size_t j = 0; j < k_; ++j) {
      const SplitValue b = beta_[j];
      const double* __restrict x = X(j);
      const double* __restrict xh = XHi(j);
      const double* __restrict xl = XLo(j);
      const double* __restrict x_low = XLow(j);
      for (std::size_t i = 0; i < B; ++i) {
        const double product = x[i] * b.value;
        const double error = (((xh[i] * b.hi - product) + xh[i] * b.lo) + xl[i] * b.hi) + xl[i] * b.lo;
        const double t = -product;
        const double sum = s[i] + t;
        const double bb = sum - s[i];
        c[i] += ((s[i] - (sum - bb)) + (t - bb)) - (error + x_low[i] * b.value);
        s[i] = sum;
      }
    }
    double r[B], r_low[B], r_hi[B], r_lo[B], w_hi[B], w_lo[B];
    for (std::size_t i = 0; i < B; ++i) {
      const double sum = s[i] + c[i];
      const double bb = sum - s[i];
      r[i] = sum;
      r_low[i] = (s[i] - (sum - bb)) + (c[i] - bb);
    }
    Split(r, r_hi, r_lo);
    Split(w_, w_hi, w_lo);
    // w r (the weight is exact: no low part).
    double wr[B], wr_low[B], wr_hi[B], wr_lo[B], zero[B] = {}, p[B], e[B];
    Product(w_, w_hi, w_lo, zero, r, r_hi, r_lo, r_low, wr, wr_low);
    Split(wr, wr_hi, wr_lo);

    Product(wr, wr_hi, wr_lo, wr_low, r, r_hi, r_lo, r_low, p, e);
    Accumulate(Lanes(SumLayout::kRss), p, e);
    for (std::size_t j = 0; j < k_; ++j) {
      Product(wr, wr_hi, wr_lo, wr_low, X(j), XHi(j), XLo(j), XLow(j), p, e);
      Accumulate(Lanes(layout_.FirstGradient() + j), p, e);
    }

    if (pass_.totals) {
      Accumulate(Lanes(SumLayout::kWeightSum), w_, zero);
      // y - shift, then w (y - shift) and w (y - shift)^2.
      double d[B], d_low[B], d_hi[B], d_lo[B], wd[B], wd_low[B], wd_hi[B], wd_lo[B];
      for (std::size_t i = 0; i < B; ++i) {
        const double t = -pass_.y_shift;
        const double sum = y_[i] + t;
        const double bb = sum - y_[i];
        d[i] = sum;
        d_low[i] = (y_[i] - (sum - bb)) + (t - bb);
      }
      Split(d, d_hi, d_lo);
      Product(w_, w_hi, w_lo, zero, d, d_hi, d_lo, d_low, wd, wd_low);
      Accumulate(Lanes(SumLayout::kShiftedSum), wd, wd_low);
      Split(wd, wd_hi, wd_lo);
      Product(wd, wd_hi, wd_lo, wd_low, d, d_hi, d_lo, d_low, p, e);
      Accumulate(Lanes(SumLayout::kShiftedSquares), p, e);
    }

    if (pass_.gram) {
      // u_i = w x_i (with its low part), split; then A_ij += u_i x_j for j >= i.
      double* u = u_.data();
      for (std::size_t i = 0; i < k_; ++i) {
        double* ui = u + 4 * i * B;
        Product(w_, w_hi, w_lo, zero, X(i), XHi(i), XLo(i), XLow(i), ui, ui + B);
        Split(ui, ui + 2 * B, ui + 3 * B);
      }
      for (std::size_t i = 0; i < k_; ++i) {
        const double* ui = u + 4 * i * B;
        for (std::size_t j = i; j < k_; ++j) {
          Product(ui, ui + 2 * B, ui + 3 * B, ui + B, X(j), XHi(j), XLo(j), XLow(j), p, e);
          Accumulate(Lanes(layout_.GramEntry(i, j)), p, e);
        }
      }
    }
  }

  RefinePass pass_;
  std::size_t k_;
  SumLayout layout_;
  std::vector<SplitValue> beta_;
  std::vector<double> x_, x_low_, x_hi_, x_lo_, u_;
  double y_[kBlockRows] = {}, w_[kBlockRows] = {};
  std::vector<double> lanes_;
  std::size_t filled_ = 0;
  std::uint64_t rows_ = 0;
};

// ---- solves through the factor -------------------------------------------------------------

// rhs := (R'R)^-1 rhs with two triangular solves (R' z = rhs, then R x = z): the factor stands in
// for X'WX without ever forming it.
void SolveThroughFactor(const arma::mat& triangle, arma::mat& rhs) {
  const int n = static_cast<int>(triangle.n_rows);
  const int columns = static_cast<int>(rhs.n_cols);
  int info = lapack::SolveUpperTriangular(true, n, columns, triangle.memptr(), n, rhs.memptr(), n);
  if (info == 0) info = lapack::SolveUpperTriangular(false, n, columns, triangle.memptr(), n, rhs.memptr(), n);
  if (info > 0) throw NumericalError("fit: the model's triangular factor is singular at position " + std::to_string(info));
}

// (X'WX)^-1 refined in memory against the compensated Gram matrix A by C += (R'R)^-1 (I - A C)
// (no pass over the rows). `gram` holds A, k x k, both triangles.
arma::mat RefineInverse(const arma::mat& triangle, const std::vector<DoubleDouble>& gram, arma::mat inverse,
                        const FitOptions& options) {
  const std::size_t k = inverse.n_rows;
  for (int iteration = 0; iteration < options.max_refinement_passes; ++iteration) {
    arma::mat residual(k, k);
    for (std::size_t j = 0; j < k; ++j) {
      for (std::size_t i = 0; i < k; ++i) {
        DoubleDouble sum{i == j ? 1.0 : 0.0, 0};
        for (std::size_t l = 0; l < k; ++l) sum = sum + (-(gram[i * k + l] * inverse(l, j)));
        residual(i, j) = sum.value();
      }
    }
    SolveThroughFactor(triangle, residual);
    double correction = 0;
    for (std::size_t j = 0; j < k; ++j) {
      for (std::size_t i = 0; i < k; ++i) {
        const double size = std::sqrt(std::abs(inverse(i, i) * inverse(j, j)));
        if (size > 0) correction = std::max(correction, std::abs(residual(i, j)) / size);
      }
    }
    inverse += residual;
    if (correction < options.refinement_tolerance) break;
  }
  return inverse;
}

}  // namespace

std::string RefinePass::Write() const {
  ByteWriter out;
  out.U64(kRefinePassRecipe);
  out.U64(columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) {
    out.U64(columns[j]);
    out.F64(column_scales[j]);
    out.F64(beta[j]);
  }
  out.F64(y_scale);
  out.F64(y_shift);
  out.U64((totals ? 1 : 0) | (gram ? 2 : 0));
  return out.Take();
}

RefinePass RefinePass::Read(ByteReader& in) {
  RefinePass pass;
  const std::uint64_t k = in.U64();
  for (std::uint64_t j = 0; j < k; ++j) {
    pass.columns.push_back(static_cast<std::size_t>(in.U64()));
    pass.column_scales.push_back(in.F64());
    pass.beta.push_back(in.F64());
  }
  pass.y_scale = in.F64();
  pass.y_shift = in.F64();
  const std::uint64_t flags = in.U64();
  pass.totals = (flags & 1) != 0;
  pass.gram = (flags & 2) != 0;
  return pass;
}

std::unique_ptr<RowSumKernel> MakeRefinePassKernel(RefinePass pass) {
  return std::make_unique<PassKernel>(std::move(pass));
}

double EstimatedContraction(std::size_t k, double rcond) {
  if (!(rcond > 0)) return 1;
  return std::min(1.0, static_cast<double>(k) * 0x1p-53 / rcond);
}

Refinement Refine(const RefineProblem& problem, arma::vec beta, arma::mat inverse,
                  const FitOptions& options, const SummingReplay& replay) {
  const std::size_t k = problem.columns.size();
  Refinement out;
  const double contraction = EstimatedContraction(k, problem.rcond);
  out.gram = contraction > kInverseFromFactorLimit;
  std::vector<DoubleDouble> gram;
  double previous_correction = std::numeric_limits<double>::infinity();
  for (int pass = 1; pass <= options.max_refinement_passes; ++pass) {
    const bool first = pass == 1;
    RefinePass recipe;
    recipe.columns = problem.columns;
    recipe.column_scales = problem.column_scales;
    recipe.y_scale = problem.y_scale;
    recipe.y_shift = problem.y_shift;
    recipe.beta.assign(beta.begin(), beta.end());
    recipe.totals = first;
    recipe.gram = first && out.gram;
    const SumLayout layout{k, recipe.gram};
    const RowSums sums = replay(recipe.Write());
    if (sums.hi.size() != layout.Count() || sums.lo.size() != layout.Count()) {
      throw std::logic_error("Refine: the replay returned " + std::to_string(sums.hi.size()) + " sums for " +
                             std::to_string(layout.Count()) + " (a bug)");
    }
    const auto sum = [&sums](std::size_t i) { return DoubleDouble{sums.hi[i], sums.lo[i]}; };
    if (sums.rows != problem.factor_rows) {
      throw NumericalError("fit: the rows replayed for refinement (" + std::to_string(sums.rows) +
                           ") are not the rows of the factor (" + std::to_string(problem.factor_rows) + ")");
    }
    if (first) {
      // Sum of squares about the weighted mean, shifted by an estimate of the mean so that the
      // subtraction below cancels little; about zero without an intercept (shift 0).
      const DoubleDouble weight_sum = sum(SumLayout::kWeightSum);
      const DoubleDouble shifted_sum = sum(SumLayout::kShiftedSum);
      const DoubleDouble correction_term =
          problem.intercept && weight_sum.hi > 0 ? shifted_sum * shifted_sum * (1.0 / weight_sum.value())
                                                 : DoubleDouble{};
      out.tss = std::max(0.0, (sum(SumLayout::kShiftedSquares) + (-correction_term)).value());
      if (out.gram) {
        gram.resize(k * k);
        for (std::size_t i = 0; i < k; ++i) {
          for (std::size_t j = i; j < k; ++j) gram[i * k + j] = gram[j * k + i] = sum(layout.GramEntry(i, j));
        }
      }
    }
    arma::mat gradient(k, 1), delta(k, 1);
    for (std::size_t j = 0; j < k; ++j) gradient(j, 0) = sum(layout.FirstGradient() + j).value();
    delta = gradient;
    SolveThroughFactor(problem.triangle, delta);
    double correction = 0;
    for (std::size_t j = 0; j < k; ++j) {
      const double size = std::max(std::abs(beta(j)), std::abs(beta(j) + delta(j, 0)));
      if (size > 0) correction = std::max(correction, std::abs(delta(j, 0)) / size);
    }
    out.passes = pass;
    const double rss = sum(SumLayout::kRss).value();  // of beta before this pass's correction
    if (!first && correction > previous_correction) {
      // The rounding floor is reached: keep the better estimate (the one this pass started from).
      out.rss = rss;
      out.stop = RefinementStop::kNotShrinking;
      break;
    }
    beta += delta.col(0);
    // RSS(b + d) = RSS(b) - 2 d'g + d'Ad = RSS(b) - g'd with A d = g.
    out.rss = std::max(0.0, rss - arma::dot(gradient, delta));
    out.correction = correction;
    // What the next pass could still change: theta c (see fit.h).
    const double theta = first ? contraction : std::max(contraction, correction / previous_correction);
    if (correction < options.refinement_tolerance || theta * correction < options.refinement_tolerance) {
      out.stop = RefinementStop::kConverged;
      break;
    }
    out.stop = RefinementStop::kPassLimit;
    previous_correction = correction;
  }
  out.beta = std::move(beta);
  if (out.gram) inverse = RefineInverse(problem.triangle, gram, std::move(inverse), options);
  out.inverse = 0.5 * (inverse + inverse.t());
  return out;
}

}  // namespace stepledger::detail

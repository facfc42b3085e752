#include "stepledger/engine/kernel.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>
#include <string>

#include "lapack.h"
#include "stepledger/engine/errors.h"

namespace stepledger {

void KernelOptions::Validate() const {
  if (!(alias_tolerance > 0 && alias_tolerance < 1)) {
    std::ostringstream message;
    message << "option alias_tolerance = " << alias_tolerance << " is out of range: it must lie in (0, 1)";
    throw InputError(message.str());
  }
}

ModelState::ModelState(const Factor& factor, KernelOptions options)
    : columns_(factor.column_count()), options_(options), r_(arma::trimatu(factor.r)),
      scales_(factor.scales) {
  options_.Validate();
  if (r_.n_rows != columns_ + 1 || r_.n_cols != columns_ + 1) {
    throw std::logic_error("ModelState: factor's R is " + std::to_string(r_.n_rows) + "x" +
                           std::to_string(r_.n_cols) + " but it has " +
                           std::to_string(scales_.size()) + " scales");
  }
  position_to_column_.resize(columns_ + 1);
  column_position_.resize(columns_ + 1);
  column_norm_.resize(columns_);
  for (std::size_t column = 0; column <= columns_; ++column) {
    position_to_column_[column] = column;
    column_position_[column] = column;
  }
  // Column norms are invariant under the orthogonal transformations that build and move R.
  for (std::size_t column = 0; column < columns_; ++column) {
    column_norm_[column] = arma::norm(r_.col(column));
  }
  // The empty model's RSS by the very sum Rss() takes (the model is empty here), so that the two
  // agree to the bit whatever BLAS kernel arma::norm would pick on this CPU.
  rss_empty_ = Rss();
}

void ModelState::CheckColumn(std::size_t column, const char* caller) const {
  if (column >= columns_) {
    throw std::logic_error(std::string("ModelState::") + caller + ": column " +
                           std::to_string(column) + " out of range (" + std::to_string(columns_) +
                           " design columns)");
  }
}

bool ModelState::Contains(std::size_t column) const {
  return column < columns_ && column_position_[column] < model_.size();
}

// Swapping positions i and i+1 leaves one entry below the diagonal, R(i+1, i); a rotation of
// rows i and i+1 (columns i..m) removes it. O(m).
void ModelState::SwapAdjacent(std::size_t position) {
  const std::size_t i = position;
  r_.swap_cols(i, i + 1);
  double c = 0, s = 0, r = 0;
  lapack::GenerateRotation(r_(i, i), r_(i + 1, i), c, s, r);
  const int length = static_cast<int>(columns_ + 1 - i);
  const int stride = static_cast<int>(r_.n_rows);
  lapack::ApplyRotation(length, &r_(i, i), stride, &r_(i + 1, i), stride, c, s);
  r_(i + 1, i) = 0;
  std::swap(position_to_column_[i], position_to_column_[i + 1]);
  column_position_[position_to_column_[i]] = i;
  column_position_[position_to_column_[i + 1]] = i + 1;
}

void ModelState::MoveColumn(std::size_t from_position, std::size_t to_position) {
  while (from_position > to_position) SwapAdjacent(--from_position);
  while (from_position < to_position) SwapAdjacent(from_position++);
}

double ModelState::RssScaled() const {
  double sum = 0;
  for (std::size_t row = model_.size(); row <= columns_; ++row) sum += r_(row, columns_) * r_(row, columns_);
  return sum;
}

double ModelState::Rss() const {
  const double y_scale = scales_.back();
  return RssScaled() / (y_scale * y_scale);
}

double ModelState::RelativeResidualNorm(std::size_t column) const {
  CheckColumn(column, "RelativeResidualNorm");
  const std::size_t position = column_position_[column];
  const std::size_t s = model_.size();
  if (position < s || column_norm_[column] == 0) return 0;
  double sum = 0;
  for (std::size_t row = s; row <= position; ++row) sum += r_(row, position) * r_(row, position);
  return std::sqrt(sum) / column_norm_[column];
}

bool ModelState::IsAliased(std::size_t column) const {
  return RelativeResidualNorm(column) < options_.alias_tolerance;
}

// RSS after adding the column alone (at its position j): the residual of r2y after its projection on
// v = R22[:, j], formed explicitly (||r2y - alpha v||^2) rather than as ||r2y||^2 - (v'r2y)^2/v'v,
// which cancels when the column explains nearly all of the remaining RSS.
GroupScore ModelState::SingleAddScore(std::size_t column, double relative_norm) const {
  const std::size_t position = column_position_[column];
  const std::size_t s = model_.size();
  double vv = 0, vr = 0;
  for (std::size_t row = s; row <= position; ++row) {
    vv += r_(row, position) * r_(row, position);
    vr += r_(row, position) * r_(row, columns_);
  }
  const double alpha = vr / vv;
  double rss = 0;
  for (std::size_t row = s; row <= position; ++row) {
    const double residual = r_(row, columns_) - alpha * r_(row, position);
    rss += residual * residual;
  }
  for (std::size_t row = position + 1; row <= columns_; ++row) rss += r_(row, columns_) * r_(row, columns_);
  const double y_scale2 = scales_.back() * scales_.back();
  GroupScore score;
  score.df = 1;
  score.rss = rss / y_scale2;
  // The drop (v'r2y)^2 / v'v: products and a quotient, so as accurate as vr itself.
  score.rss_change = alpha * vr / y_scale2;
  score.min_relative_norm = relative_norm;
  return score;
}

std::vector<std::optional<GroupScore>> ModelState::ScoreAllSingleAdds() const {
  std::vector<std::optional<GroupScore>> scores(columns_);
  for (std::size_t column = 0; column < columns_; ++column) {
    if (Contains(column)) continue;
    const double relative_norm = RelativeResidualNorm(column);
    if (relative_norm < options_.alias_tolerance) continue;  // aliased (IsAliased)
    scores[column] = SingleAddScore(column, relative_norm);
  }
  return scores;
}

GroupScore ModelState::ScoreAdd(std::span<const std::size_t> columns) const {
  GroupScore score;
  score.df = columns.size();
  const std::size_t s = model_.size();
  for (std::size_t index = 0; index < columns.size(); ++index) {
    CheckColumn(columns[index], "ScoreAdd");
    if (Contains(columns[index])) {
      throw std::logic_error("ModelState::ScoreAdd: column " + std::to_string(columns[index]) +
                             " is already in the model");
    }
    if (std::find(columns.begin(), columns.begin() + index, columns[index]) != columns.begin() + index) {
      throw std::logic_error("ModelState::ScoreAdd: column " + std::to_string(columns[index]) +
                             " repeated in the group");
    }
  }
  const double y_scale2 = scales_.back() * scales_.back();
  if (columns.empty()) {
    score.rss = Rss();
    return score;
  }
  if (columns.size() == 1) {
    // Same arithmetic as ScoreAllSingleAdds, so both rank candidates identically.
    score.min_relative_norm = RelativeResidualNorm(columns[0]);
    if (score.min_relative_norm < options_.alias_tolerance) {
      score.aliased = true;
      score.aliased_columns.push_back(columns[0]);
      return score;
    }
    return SingleAddScore(columns[0], score.min_relative_norm);
  }
  // Small QR of [R22[:, G] | r2y]: the diagonal gives each column's norm after projection on the
  // model and the group's earlier columns; the last diagonal entry is the remaining part of r2y.
  const std::size_t rows = columns_ - s;
  const std::size_t d = columns.size();
  arma::mat block(rows, d + 1, arma::fill::zeros);
  for (std::size_t index = 0; index < d; ++index) {
    const std::size_t position = column_position_[columns[index]];
    for (std::size_t row = s; row <= position; ++row) block(row - s, index) = r_(row, position);
  }
  for (std::size_t row = s; row < columns_; ++row) block(row - s, d) = r_(row, columns_);
  lapack::HouseholderQr(static_cast<int>(rows), static_cast<int>(d + 1), block.memptr(),
                        static_cast<int>(rows));
  for (std::size_t index = 0; index < d; ++index) {
    const double norm = column_norm_[columns[index]];
    const double relative = norm == 0 ? 0 : std::abs(block(index, index)) / norm;
    score.min_relative_norm = std::min(score.min_relative_norm, relative);
    if (relative < options_.alias_tolerance) {
      score.aliased = true;
      score.aliased_columns.push_back(columns[index]);
    }
  }
  if (score.aliased) return score;
  const double remaining = rows > d ? block(d, d) : 0.0;
  const double rho = r_(columns_, columns_);
  score.rss = (remaining * remaining + rho * rho) / y_scale2;
  // The drop: the response's components along the group's directions (the first d entries of
  // the last column of the small factor).
  double drop = 0;
  for (std::size_t index = 0; index < d && index < rows; ++index) drop += block(index, d) * block(index, d);
  score.rss_change = drop / y_scale2;
  return score;
}

GroupScore ModelState::ScoreRemove(std::span<const std::size_t> columns) const {
  for (std::size_t column : columns) {
    CheckColumn(column, "ScoreRemove");
    if (!Contains(column)) {
      throw std::logic_error("ModelState::ScoreRemove: column " + std::to_string(column) +
                             " is not in the model");
    }
  }
  ModelState reduced = *this;
  reduced.Remove(columns);
  GroupScore score;
  score.df = columns.size();
  score.rss = reduced.Rss();
  // The rise: the rotations that moved the removed columns out of the model leave the response's
  // components along them in rows s' .. s - 1 (s' = the smaller model's size); the rows from s
  // on are untouched, so the rise is those components' squares, no difference of two RSS.
  const double y_scale = scales_.back();
  double rise = 0;
  for (std::size_t row = reduced.model_.size(); row < model_.size(); ++row) {
    rise += reduced.r_(row, columns_) * reduced.r_(row, columns_);
  }
  score.rss_change = rise / (y_scale * y_scale);
  return score;
}

bool ModelState::Add(std::span<const std::size_t> columns) {
  for (std::size_t index = 0; index < columns.size(); ++index) {
    const std::size_t column = columns[index];
    CheckColumn(column, "Add");
    if (Contains(column)) {
      throw std::logic_error("ModelState::Add: column " + std::to_string(column) +
                             " is already in the model");
    }
    if (std::find(columns.begin(), columns.begin() + index, column) != columns.begin() + index) {
      throw std::logic_error("ModelState::Add: column " + std::to_string(column) + " repeated in the group");
    }
  }
  if (columns.size() == 1) {
    if (IsAliased(columns[0])) return false;
    MoveColumn(column_position_[columns[0]], model_.size());
    model_.push_back(columns[0]);
    return true;
  }
  ModelState before = *this;  // restored when a later column of the group turns out aliased
  for (std::size_t column : columns) {
    if (IsAliased(column)) {
      *this = std::move(before);
      return false;
    }
    MoveColumn(column_position_[column], model_.size());
    model_.push_back(column);
  }
  return true;
}

void ModelState::Remove(std::span<const std::size_t> columns) {
  for (std::size_t column : columns) {
    CheckColumn(column, "Remove");
    if (!Contains(column)) {
      throw std::logic_error("ModelState::Remove: column " + std::to_string(column) +
                             " is not in the model");
    }
    // Rotating it to the last model position keeps the other model columns in their order.
    MoveColumn(column_position_[column], model_.size() - 1);
    model_.erase(std::find(model_.begin(), model_.end(), column));
  }
}

arma::mat ModelState::ModelTriangle() const {
  const std::size_t s = model_.size();
  if (s == 0) return arma::mat(0, 0);
  return arma::trimatu(r_.submat(0, 0, s - 1, s - 1));
}

ModelSolution ModelState::Solve() const {
  ModelSolution solution;
  solution.columns = model_;
  solution.rss = Rss();
  const std::size_t s = model_.size();
  solution.beta.zeros(s);
  solution.xtwx_inverse.zeros(s, s);
  solution.rcond = 1;
  if (s == 0) return solution;
  const arma::mat triangle = ModelTriangle();
  const int n = static_cast<int>(s);
  arma::vec beta = r_.col(columns_).head(s);
  const int info = lapack::SolveUpperTriangular(false, n, 1, triangle.memptr(), n, beta.memptr(), n);
  if (info > 0) {
    throw NumericalError("kernel: the model's triangular factor is singular at design column " +
                         std::to_string(model_[static_cast<std::size_t>(info - 1)]));
  }
  arma::mat inverse = triangle;
  const int inverse_info = lapack::InverseFromUpperFactor(n, inverse.memptr(), n);
  if (inverse_info > 0) {
    throw NumericalError("kernel: (X'WX)^-1 does not exist; zero pivot at design column " +
                         std::to_string(model_[static_cast<std::size_t>(inverse_info - 1)]));
  }
  inverse = arma::symmatu(inverse);
  solution.rcond = lapack::UpperTriangularRcond(n, triangle.memptr(), n);
  // Undo the power-of-two scales (exact): x_j' = x_j s_j and y' = y s_y.
  const double y_scale = scales_.back();
  for (std::size_t i = 0; i < s; ++i) {
    const double scale_i = scales_[model_[i]];
    solution.beta(i) = beta(i) * scale_i / y_scale;
    for (std::size_t j = 0; j < s; ++j) {
      solution.xtwx_inverse(i, j) = inverse(i, j) * scale_i * scales_[model_[j]];
    }
  }
  return solution;
}

}  // namespace stepledger

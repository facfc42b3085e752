#include "support/dense_design.h"

#include <cmath>
#include <memory>
#include <stdexcept>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/resampling.h"

namespace stepledger::testing {

double PowerOfTwoScale(const arma::vec& values) {
  const double largest = values.is_empty() ? 0.0 : arma::abs(values).max();
  if (largest == 0 || !std::isfinite(largest)) return 1.0;
  return std::ldexp(1.0, -static_cast<int>(std::lround(std::log2(largest))));
}

std::vector<double> PowerOfTwoScales(const arma::mat& x, const arma::vec& y) {
  std::vector<double> scales;
  for (arma::uword column = 0; column < x.n_cols; ++column) scales.push_back(PowerOfTwoScale(x.col(column)));
  scales.push_back(PowerOfTwoScale(y));
  return scales;
}

Factor BuildFactor(const arma::mat& x, const arma::vec& y, const arma::vec& w, std::size_t block_rows,
                   std::vector<double> scales) {
  if (scales.empty()) scales = PowerOfTwoScales(x, y);
  FactorBuilder builder(scales, block_rows);
  std::vector<double> row(x.n_cols);
  for (arma::uword i = 0; i < x.n_rows; ++i) {
    for (arma::uword j = 0; j < x.n_cols; ++j) row[j] = x(i, j);
    builder.AddRow(row, y(i), w.is_empty() ? 1.0 : w(i));
  }
  return builder.Finish();
}

std::vector<std::size_t> FoldsOfRows(std::size_t rows, std::uint64_t seed, std::size_t folds) {
  std::vector<std::size_t> fold_of_row(rows);
  for (std::size_t i = 0; i < rows; ++i) fold_of_row[i] = FoldOfRecord(seed, i, folds);
  return fold_of_row;
}

std::vector<Factor> BuildFoldFactors(const arma::mat& x, const arma::vec& y, const arma::vec& w,
                                     const std::vector<std::size_t>& fold_of_row, std::size_t folds,
                                     std::vector<double> scales) {
  if (scales.empty()) scales = PowerOfTwoScales(x, y);
  std::vector<FactorBuilder> builders;
  for (std::size_t f = 0; f < folds; ++f) builders.emplace_back(scales, 16);
  std::vector<double> row(x.n_cols);
  for (arma::uword i = 0; i < x.n_rows; ++i) {
    for (arma::uword j = 0; j < x.n_cols; ++j) row[j] = x(i, j);
    builders[fold_of_row[i]].AddRow(row, y(i), w.is_empty() ? 1.0 : w(i));
  }
  std::vector<Factor> factors;
  for (auto& builder : builders) factors.push_back(builder.Finish());
  return factors;
}

std::optional<std::vector<double>> BruteForceFoldSse(const arma::mat& x, const arma::vec& y,
                                                     const arma::vec& w,
                                                     const std::vector<std::size_t>& fold_of_row,
                                                     std::size_t folds,
                                                     const std::vector<std::size_t>& columns) {
  const arma::vec weights = w.is_empty() ? arma::vec(x.n_rows, arma::fill::ones) : w;
  arma::uvec picked(columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) picked(j) = columns[j];
  std::vector<double> sse(folds, 0.0);
  for (std::size_t f = 0; f < folds; ++f) {
    std::vector<arma::uword> train, test;
    for (arma::uword i = 0; i < x.n_rows; ++i) (fold_of_row[i] == f ? test : train).push_back(i);
    if (test.empty()) continue;
    const arma::uvec train_rows(train), test_rows(test);
    arma::vec beta(columns.size(), arma::fill::zeros);
    if (!columns.empty()) {
      if (train.size() < columns.size()) return std::nullopt;
      const arma::vec root = arma::sqrt(weights(train_rows));
      const arma::mat a = arma::diagmat(root) * x.submat(train_rows, picked);
      const arma::vec b = root % y(train_rows);
      if (arma::rank(a) < columns.size()) return std::nullopt;
      if (!arma::solve(beta, a, b, arma::solve_opts::no_approx)) return std::nullopt;
    }
    const arma::vec residual =
        y(test_rows) - (columns.empty() ? arma::vec(test.size(), arma::fill::zeros)
                                        : arma::vec(x.submat(test_rows, picked) * beta));
    sse[f] = arma::accu(weights(test_rows) % arma::square(residual));
  }
  return sse;
}

RowReplay MemoryRowReplay(const arma::mat& x, const arma::vec& y, const arma::vec& w, const arma::mat& x_low) {
  if (!x_low.is_empty() && (x_low.n_rows != x.n_rows || x_low.n_cols != x.n_cols)) {
    throw std::invalid_argument("MemoryRowReplay: x_low must have the shape of x");
  }
  // Rows stored as columns so that each row is contiguous for UsedRow::x.
  auto rows = std::make_shared<const arma::mat>(x.t());
  auto low_rows = std::make_shared<const arma::mat>(x_low.t());
  auto responses = std::make_shared<const arma::vec>(y);
  auto weights = std::make_shared<const arma::vec>(w.is_empty() ? arma::vec(y.n_elem, arma::fill::ones) : w);
  return [rows, low_rows, responses, weights](const std::function<void(const UsedRow&)>& visit) {
    for (arma::uword i = 0; i < rows->n_cols; ++i) {
      UsedRow row;
      row.row_index = i;
      row.line = i + 2;
      row.x = std::span<const double>(rows->colptr(i), rows->n_rows);
      if (!low_rows->is_empty()) row.x_low = std::span<const double>(low_rows->colptr(i), low_rows->n_rows);
      row.y = (*responses)(i);
      row.weight = (*weights)(i);
      visit(row);
    }
  };
}

SummingReplay PartedSummingReplay(const arma::mat& x, const arma::vec& y, const arma::vec& w, const arma::mat& x_low,
                                  std::vector<arma::uword> cuts, int* parts_summed) {
  return [=](std::string_view recipe) {
    RowSums total;
    for (std::size_t part = 0; part + 1 < cuts.size(); ++part) {
      const std::unique_ptr<RowSumKernel> kernel = MakeRowSumKernel(recipe);
      if (cuts[part + 1] > cuts[part]) {
        const arma::uvec rows = arma::regspace<arma::uvec>(cuts[part], cuts[part + 1] - 1);
        MemoryRowReplay(x.rows(rows), y.elem(rows), w.is_empty() ? arma::vec() : arma::vec(w.elem(rows)),
                        x_low.is_empty() ? arma::mat() : arma::mat(x_low.rows(rows)))(
            [&](const UsedRow& row) { kernel->Add(row); });
      }
      const RowSums sums = kernel->Finish();
      EXPECT_EQ(sums.rows, cuts[part + 1] - cuts[part]) << "part " << part;
      if (part == 0) total = sums;
      else total.Add(RowSums::Read(sums.Write()));
      if (parts_summed != nullptr) ++*parts_summed;
    }
    return total;
  };
}

Design MakeDenseDesign(bool intercept, const std::vector<std::pair<std::string, std::size_t>>& terms,
                       const std::vector<double>& scales) {
  Design design;
  design.response = "y";
  design.intercept = intercept;
  if (intercept) design.columns.push_back({"intercept", kNoTerm, 1.0});
  for (std::size_t term_index = 0; term_index < terms.size(); ++term_index) {
    const auto& [name, count] = terms[term_index];
    DesignTerm term;
    term.name = name;
    term.kind = count == 1 ? TermKind::kNumeric : TermKind::kCategorical;
    term.first_column = design.columns.size();
    term.column_count = count;
    term.source_column = name;
    for (std::size_t c = 0; c < count; ++c) {
      design.columns.push_back({count == 1 ? name : name + "[" + std::to_string(c + 1) + "]", term_index, 1.0});
    }
    design.terms.push_back(term);
  }
  if (scales.size() != design.columns.size() + 1) {
    throw std::invalid_argument("MakeDenseDesign: " + std::to_string(scales.size()) + " scales for " +
                                std::to_string(design.columns.size()) + " columns and the response");
  }
  for (std::size_t c = 0; c < design.columns.size(); ++c) design.columns[c].scale = scales[c];
  design.response_scale = scales.back();
  return design;
}

std::vector<std::size_t> AllTerms(const Design& design) {
  std::vector<std::size_t> indices(design.terms.size());
  for (std::size_t t = 0; t < indices.size(); ++t) indices[t] = t;
  return indices;
}

}  // namespace stepledger::testing

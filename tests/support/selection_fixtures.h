#pragma once
// In-memory problems for the selection tests and benchmarks: a Design built by hand, the
// factor folded from dense rows (engine FactorBuilder, so the kernel sees exactly what a data
// pass would give it), the Hald cement data, and invented data with a known true model.

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include <armadillo>

#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"

namespace stepledger::testing {

/// One term of a hand-made design: its name, width and (for hierarchy) the terms it builds on.
struct DenseTermSpec {
  DenseTermSpec(std::string term_name, std::size_t columns = 1, std::vector<std::string> part_names = {},
                TermKind term_kind = TermKind::kNumeric)
      : name(std::move(term_name)), column_count(columns), parts(std::move(part_names)), kind(term_kind) {}
  DenseTermSpec(const char* term_name) : DenseTermSpec(std::string(term_name)) {}
  std::string name;
  std::size_t column_count = 1;
  std::vector<std::string> parts;
  TermKind kind = TermKind::kNumeric;
};

/// Rows in memory and everything the search needs from them.
struct DenseProblem {
  arma::mat x;   ///< n x design columns (intercept column first when there is one)
  arma::vec y;
  Design design;
  Factor factor;
  std::vector<std::string> true_terms;  ///< invented data: the terms y was built from
};

/// A Design with the intercept (when asked) and the terms' columns in order.
Design MakeDenseDesign(const std::vector<DenseTermSpec>& terms, bool intercept = true);
/// Folds the rows into a factor (scales 1, weights 1).
Factor FactorFromRows(const arma::mat& x, const arma::vec& y, const Design& design,
                      std::size_t block_rows = 128);
/// predictors: n x (sum of column counts), without the intercept column.
DenseProblem MakeDenseProblem(const arma::mat& predictors, const arma::vec& y,
                              const std::vector<DenseTermSpec>& terms, bool intercept = true);

/// The Hald cement data (terms x1..x4, response y), or nullopt when the reference folder is
/// absent. Source: Woods, Steinour and Starke (1932) as given in Hald (1952), reproduced in
/// Draper and Smith, Applied Regression Analysis.
/// Throws std::runtime_error naming the file when it is missing.
DenseProblem LoadHald();

struct RandomProblemOptions {
  std::uint64_t seed = 1;
  std::size_t n = 200;
  std::size_t numeric_terms = 10;
  /// Levels of one categorical term added after the numeric ones (0: none).
  std::size_t categorical_levels = 0;
  /// Correlation of neighbouring numeric predictors (AR(1) across terms), in [0, 1).
  double correlation = 0.5;
  /// The first true_terms numeric terms (and the categorical one, when there is one and
  /// categorical_true) carry nonzero coefficients.
  std::size_t true_terms = 3;
  bool categorical_true = true;
  /// Coefficient size of the true terms, in units of the noise SD.
  double effect = 0.3;
};

/// Invented data with a known true model (seeded, platform-independent generator).
DenseProblem MakeRandomProblem(const RandomProblemOptions& options);

}  // namespace stepledger::testing

#pragma once
// Private: refinement of a fit against the rows (the rule is documented at the top of
// stepledger/engine/fit.h). Everything here is in the factor's scaled units (exact powers of
// two), so that the rows' values can be scaled without rounding.
//
// Nothing outside engine/src includes this file.

#include <cstdint>
#include <vector>

#include <armadillo>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/row_sums.h"
#include "stepledger/engine/share_exchange.h"

namespace stepledger::detail {

struct RefineProblem {
  arma::mat triangle;                 // R11 of the model, scaled units
  std::vector<std::size_t> columns;   // design columns of the model, model order
  std::vector<double> column_scales;  // their scales
  double y_scale = 1;
  bool intercept = true;
  double y_shift = 0;                 // estimate of the scaled weighted mean of y (0 without intercept)
  double rcond = 0;                   // of the triangle
  std::uint64_t factor_rows = 0;      // rows the factor was built from
};

struct Refinement {
  arma::vec beta;      // scaled units
  arma::mat inverse;   // (X'WX)^-1, scaled units
  double rss = 0;      // of beta, scaled units
  double tss = 0;      // scaled units
  int passes = 0;
  double correction = 0;
  RefinementStop stop = RefinementStop::kNotRefined;
  bool gram = false;   // whether the first pass accumulated X'WX for the inverse
};

/// The first u64 of a refinement pass's recipe (MakeRowSumKernel).
inline constexpr std::uint64_t kRefinePassRecipe = 1;

/// What one refinement pass sums, enough for any process to build its kernel: the model's
/// design columns and their scales, the response's scale and shift, the estimates (all scaled
/// units); totals: also sum w, sum w (y - shift), sum w (y - shift)^2; gram: also X'WX.
struct RefinePass {
  std::vector<std::size_t> columns;
  std::vector<double> column_scales;
  std::vector<double> beta;
  double y_scale = 1;
  double y_shift = 0;
  bool totals = false;
  bool gram = false;
  /// The recipe (starts with kRefinePassRecipe).
  std::string Write() const;
  /// The rest of a recipe after its first u64.
  static RefinePass Read(ByteReader& in);
};

std::unique_ptr<RowSumKernel> MakeRefinePassKernel(RefinePass pass);

/// k u / rcond: the estimated contraction of one pass and relative error of the factor's
/// inverse (1 at most; 1 when rcond is not positive).
double EstimatedContraction(std::size_t k, double rcond);

/// Refines beta and inverse (the factor's, scaled units) against the rows. Requires
/// options.max_refinement_passes >= 1 and a non-empty model.
Refinement Refine(const RefineProblem& problem, arma::vec beta, arma::mat inverse,
                  const FitOptions& options, const SummingReplay& replay);

}  // namespace stepledger::detail

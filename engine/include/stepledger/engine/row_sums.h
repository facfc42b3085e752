#pragma once
// Sums over the rows that parts of the rows can compute apart and add: one refinement pass's sums
// (the gradient X'W r, the residual sum of squares W r^2, the response totals and X'WX; see
// engine/fit.h). Each part of the rows (in a run shared by processes, one process's own spill)
// runs its own kernel over its rows and ends with its sums as double-double values (hi + lo,
// about 106 bits); the parts' sums are added in double-double too. A different split of the rows
// therefore changes a sum only near 2^-100 of its size: the doubles a fit keeps come out the same
// in almost every case, and always far inside the 1e-12 that a shared run promises.
//
// A kernel is named by a recipe: bytes that say what it sums and with which parameters, so that
// another process can build the very same kernel (MakeRowSumKernel) without the fit that asked.

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/data_pass.h"

namespace stepledger {

/// A part's sums: value i is hi[i] + lo[i] (|lo| at most half an ulp of hi), over `rows` rows.
struct RowSums {
  std::uint64_t rows = 0;
  std::vector<double> hi, lo;

  /// Adds the sums of another part of the same recipe, value by value in double-double.
  void Add(const RowSums& other);
  /// Exact bytes and back (the exchange between processes).
  std::string Write() const;
  static RowSums Read(std::string_view bytes);
};

/// The kernel of one recipe over one part of the rows.
class RowSumKernel {
 public:
  virtual ~RowSumKernel() = default;
  virtual void Add(const UsedRow& row) = 0;
  /// After the part's last row: its sums.
  virtual RowSums Finish() = 0;
};

/// Builds the kernel a recipe names (throws std::invalid_argument for bytes no recipe wrote).
std::unique_ptr<RowSumKernel> MakeRowSumKernel(std::string_view recipe);

/// A recipe's sums over all the rows of a replay, however they are split into parts.
using SummingReplay = std::function<RowSums(std::string_view recipe)>;

/// One part: every row of `replay` through one kernel, in the replay's order.
SummingReplay SumOverReplay(RowReplay replay);

}  // namespace stepledger

#pragma once
// The Poisson bootstrap's replicate factors, all built in one read of the typed spill.
//
// Replicate r weights used row i by a Poisson(1) count c(i, r) (PoissonDraws, from the record
// index and the bootstrap seed only) and its factor is the one-pass factor of the rows with
// c > 0, each folded once with weight w·c (FactorBuilder::AddRepeatedRow). The rows are read
// once, in batches; the replicates are shared out across threads, and each replicate's rows
// fold in file order through one builder with fixed blocks, so a replicate's factor is the
// same bit for bit for any thread count (what the bootstrap's audit promises).

#include <cstddef>
#include <cstdint>
#include <functional>
#include <optional>
#include <span>
#include <vector>

#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/resampling.h"
#include "stepledger/engine/spill.h"

namespace stepledger {

struct BootstrapPassOptions {
  BootstrapSettings settings;
  /// Held-out rows (when the plan has a holdout) stay out of every replicate.
  std::optional<HoldoutSettings> holdout;
  /// Threads folding replicates (>= 1); the result does not depend on it.
  int threads = 1;
  /// Rows per dtpqrt block of each replicate's builder (>= 1). Changes rounding, so it is fixed
  /// for a run; the default keeps 200 replicates of 30 columns near 40 MB.
  std::size_t block_rows = 128;
  /// Rows read per batch handed to the threads (>= 1); does not change a result.
  std::size_t batch_rows = 4096;
  /// Called on the calling thread after each batch with the used rows read so far (optional).
  std::function<void(std::uint64_t rows_done)> progress;
};

/// Bytes the replicate builders take: replicates x (triangle + block) of design_columns + 1.
std::uint64_t BootstrapFactorBytes(std::size_t design_columns, std::size_t replicates, std::size_t block_rows);
/// Most bytes of replicate builders a run may take (1 GiB); a plan past it is refused before the
/// pass with PlanError at "bootstrap.replicates".
inline constexpr std::uint64_t kBootstrapFactorBudget = std::uint64_t{1} << 30;

/// Factor r of the result is replicate r's, over every design column (the design's scales),
/// without column statistics. Rows are the used rows of the design (missing cells, zero weights
/// and held-out rows excluded as in the factor pass).
std::vector<Factor> BuildBootstrapFactors(const Spill& spill, const Design& design,
                                          const BootstrapPassOptions& options);

}  // namespace stepledger

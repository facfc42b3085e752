#pragma once
// Private to run/: a run of a plan shared by several processes (RunOptions::shares; a cluster
// run under mpirun). Every process scans its share of the data into its own spill
// (engine/table_scan.h, "Shares"), builds the same design from the same profile and folds the
// factors of its own rows; the factors meet on process 0 through a binomial reduction tree
// (process p takes the part of p + 2^i at step i, lower processes first, so the merge order is a
// function of the layout only). Process 0 then runs the search and everything after it; the
// other processes serve its requests until it is done:
//   - a replay (refinement, diagnostics, prediction support, holdout): process 0 visits the used
//     rows of every range in record order, its own from its spill, another process's streamed
//     to it one bounded batch at a time (this moves rows, not sums: the visit is the very one a
//     single process makes, so the results are the same bits);
//   - the fold factors of the final model's columns (when the factor pass could not keep every
//     column's) and the bootstrap's replicate factors: each process folds its rows, the tree
//     merges them.
// An error on any process reaches process 0 in place of that process's part; process 0 throws
// it (the command prints it and exits 2 for bad input) and tells the others to stop.

#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "stepledger/engine/bootstrap_pass.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/share_exchange.h"
#include "stepledger/engine/spill.h"

namespace stepledger::run_detail {

/// A PassResult as bytes and back (exact).
std::string WritePass(const PassResult& pass);
PassResult ReadPass(std::string_view bytes);

/// Combines every process's part on process 0 through the binomial tree; `merge(lower, upper)`
/// joins the parts of two neighbouring groups of processes, lower first. Parts are encoded
/// (EncodeValue/EncodeError): an error wins over a value, the lower process's error over a
/// higher one's. Returns the combined part on process 0, and on the others what they sent.
std::string ReduceToFirst(ShareExchange& exchange, std::string part,
                          const std::function<std::string(std::string_view, std::string_view)>& merge);

class SharedRun {
 public:
  SharedRun(ShareExchange& exchange, std::shared_ptr<const Spill> spill, const Design& design,
            std::optional<HoldoutSettings> holdout);
  /// On process 0: tells the other processes to stop serving (once they serve).
  ~SharedRun();
  SharedRun(const SharedRun&) = delete;
  SharedRun& operator=(const SharedRun&) = delete;

  bool driving() const { return exchange_.index() == 0; }
  /// Collective: every process's factor pass over its own spill, merged on process 0. Returns
  /// the merged pass on process 0 (throws the first error), and this process's own elsewhere.
  PassResult FactorPass(const PassOptions& options);
  /// On processes other than 0, after FactorPass: answers process 0's requests until it is done.
  void Serve(const std::optional<FoldSettings>& folds, const std::optional<BootstrapPassOptions>& bootstrap);

  /// Process 0: replays the used rows of every process in record order.
  RowReplay Replay(RowSet set);
  /// Process 0: the fold factors of `columns` over every process's rows (BuildFoldFactors).
  std::vector<Factor> FoldFactors(std::span<const std::size_t> columns, const FoldSettings& folds);
  /// Process 0: the bootstrap's replicate factors over every process's rows (BuildBootstrapFactors).
  std::vector<Factor> BootstrapFactors(const BootstrapPassOptions& options);

 private:
  struct RangeOwner {
    std::uint64_t rows_before = 0;
    int process = 0;
    std::size_t local_range = 0;
  };
  void ReplayRange(const RangeOwner& owner, RowSet set, const std::function<void(const UsedRow&)>& visit);
  void SendToOthers(const std::string& request);

  ShareExchange& exchange_;
  std::shared_ptr<const Spill> spill_;
  Design design_;
  std::optional<HoldoutSettings> holdout_;
  std::vector<RangeOwner> layout_;  // every process's non-empty ranges, in record order
  bool others_serving_ = false;
};

}  // namespace stepledger::run_detail

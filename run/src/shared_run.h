#pragma once
// Private to run/: a run of a plan shared by several processes (RunOptions::shares; a cluster
// run under mpirun). Every process scans its share of the data into its own spill
// (engine/table_scan.h, "Shares"), builds the same design from the same profile and folds the
// factors of its own rows; the factors meet on process 0 through a binomial reduction tree
// (process p takes the part of p + 2^i at step i, lower processes first, so the merge order is a
// function of the layout only). Process 0 then runs the search and everything after it; the
// other processes serve its requests until it is done:
//   - a refinement pass: every process sums its own rows (engine/row_sums.h), the tree adds the
//     parts in double-double;
//   - the diagnostics (and prediction support): every process diagnoses its own rows and streams
//     the rows' diagnostics (a fixed record each) to process 0 in record order, which folds them
//     as a single process would (binned views and quantile sketches depend on the order);
//   - the holdout: every process evaluates its own held-out rows (prediction, flags) and streams
//     a record per row to process 0 in record order, as for the diagnostics;
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
#include "stepledger/engine/diagnostics.h"
#include "stepledger/engine/row_sums.h"
#include "stepledger/engine/share_exchange.h"
#include "stepledger/engine/spill.h"
#include "validation_run.h"

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

  /// Process 0: the held-out rows evaluated by the processes that hold them, in record order (a
  /// record of 32 bytes a row travels).
  HeldOutReplay EvaluatingHeldOut();
  /// Process 0: the used rows diagnosed by the processes that hold them, in record order (the
  /// diagnostics, not the rows, travel: a fixed record of 80 bytes a row).
  DiagnosingReplay Diagnosing(RowSet set);
  /// Process 0: sums over the used rows of every process, each process summing its own rows
  /// with its own kernel, the parts added through the tree (engine/row_sums.h).
  SummingReplay Sums(RowSet set);
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
  /// Process 0: every range in record order, its own through `own`, another process's by a
  /// request (kind, range, set, then `request_body`) answered by a stream (ReceiveRange).
  void InRecordOrder(std::uint64_t request_kind, RowSet set, const std::string& request_body,
                     const std::function<void(std::size_t local_range)>& own,
                     const std::function<void(ByteReader&, bool visit)>& read,
                     const std::function<void(ByteReader&)>& read_tail);
  /// The used rows of one of this process's ranges (the replay DiagnoseHere and EvaluateHere take,
  /// on process 0 for its own ranges and on the others for the ranges they stream).
  RowReplay RangeRows(std::size_t range, RowSet set) const;
  /// Serving: streams records to process 0 in batches of kStreamBatchRecords: `produce` appends
  /// them in order to `batch`, calling `written` after each; the last batch ends with `tail`. An
  /// error is sent in place of the batch it stopped.
  void StreamRange(const std::function<void(ByteWriter& batch, const std::function<void()>& written)>& produce,
                   const std::function<void(ByteWriter&)>& tail);
  /// Process 0: receives a range streamed by `process`, `read` decoding one record (and visiting it
  /// while `visit`), `read_tail` the last batch's tail. After a visit failed, the rest of the
  /// stream is still taken (read with visit false), then the failure is thrown.
  void ReceiveRange(int process, const std::function<void(ByteReader&, bool visit)>& read,
                    const std::function<void(ByteReader&)>& read_tail);
  void SendToOthers(const std::string& request);
  RowSums OwnSums(std::string_view recipe, RowSet set) const;

  ShareExchange& exchange_;
  std::shared_ptr<const Spill> spill_;
  Design design_;
  std::optional<HoldoutSettings> holdout_;
  std::vector<RangeOwner> layout_;  // every process's non-empty ranges, in record order
  bool others_serving_ = false;
};

}  // namespace stepledger::run_detail

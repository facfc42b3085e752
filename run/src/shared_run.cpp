#include "shared_run.h"

#include <algorithm>
#include <exception>
#include <stdexcept>
#include <utility>

#include "stepledger/engine/errors.h"

namespace stepledger::run_detail {
namespace {

// What process 0 asks of the others (the first u64 of a request).
enum class Request : std::uint64_t { kStop = 1, kReplayRange, kFoldFactors, kBootstrap };

// Rows per message of a streamed replay: a few MB for a hundred columns, so that neither side
// holds more than one batch.
constexpr std::size_t kReplayBatchRows = 2048;

void WriteAccounting(ByteWriter& out, const RowAccounting& accounting) {
  out.U64(accounting.rows_read);
  out.U64(accounting.rows_used);
  out.U64(accounting.rows_held_out);
  out.U64(accounting.rows_dropped.size());
  for (const RowDrop& drop : accounting.rows_dropped) {
    out.U64(static_cast<std::uint64_t>(drop.reason));
    out.Text(drop.column);
    out.U64(drop.rows);
  }
}

RowAccounting ReadAccounting(ByteReader& in) {
  RowAccounting accounting;
  accounting.rows_read = in.U64();
  accounting.rows_used = in.U64();
  accounting.rows_held_out = in.U64();
  accounting.rows_dropped.resize(in.U64());
  for (RowDrop& drop : accounting.rows_dropped) {
    drop.reason = static_cast<DropReason>(in.U64());
    drop.column = in.Text();
    drop.rows = in.U64();
  }
  return accounting;
}

std::string WriteFactors(const std::vector<Factor>& factors) {
  ByteWriter out;
  out.U64(factors.size());
  for (const Factor& factor : factors) WriteFactor(out, factor);
  return out.Take();
}

std::vector<Factor> ReadFactors(std::string_view bytes) {
  ByteReader in(bytes);
  std::vector<Factor> factors(in.U64());
  for (Factor& factor : factors) factor = ReadFactor(in);
  return factors;
}

// Factor by factor, lower processes' rows first.
std::string MergeFactorLists(std::string_view lower, std::string_view upper) {
  std::vector<Factor> a = ReadFactors(lower);
  const std::vector<Factor> b = ReadFactors(upper);
  if (a.size() != b.size()) throw std::logic_error("MergeFactorLists: factor counts differ between processes (a bug)");
  for (std::size_t i = 0; i < a.size(); ++i) a[i] = MergeFactors(a[i], b[i]);
  return WriteFactors(a);
}

std::string MergePasses(std::string_view lower, std::string_view upper) {
  PassResult a = ReadPass(lower);
  const PassResult b = ReadPass(upper);
  if (a.fold_factors.size() != b.fold_factors.size()) {
    throw std::logic_error("MergePasses: fold counts differ between processes (a bug)");
  }
  a.factor = MergeFactors(a.factor, b.factor);
  for (std::size_t f = 0; f < a.fold_factors.size(); ++f) a.fold_factors[f] = MergeFactors(a.fold_factors[f], b.fold_factors[f]);
  a.accounting.Add(b.accounting);
  return WritePass(a);
}

template <typename Work>
std::string Guarded(Work&& work) {
  try {
    return EncodeValue(work());
  } catch (...) {
    return EncodeError(std::current_exception());
  }
}

std::string Value(const std::string& part) {
  if (HoldsError(part)) RethrowPart(part);
  return std::string(ValueOf(part));
}

}  // namespace

std::string WritePass(const PassResult& pass) {
  ByteWriter out;
  WriteFactor(out, pass.factor);
  out.U64(pass.fold_factors.size());
  for (const Factor& factor : pass.fold_factors) WriteFactor(out, factor);
  WriteAccounting(out, pass.accounting);
  return out.Take();
}

PassResult ReadPass(std::string_view bytes) {
  ByteReader in(bytes);
  PassResult pass;
  pass.factor = ReadFactor(in);
  pass.fold_factors.resize(in.U64());
  for (Factor& factor : pass.fold_factors) factor = ReadFactor(in);
  pass.accounting = ReadAccounting(in);
  return pass;
}

std::string ReduceToFirst(ShareExchange& exchange, std::string part,
                          const std::function<std::string(std::string_view, std::string_view)>& merge) {
  const int me = exchange.index();
  const int count = exchange.count();
  for (int step = 1; step < count; step *= 2) {
    if (me % (2 * step) != 0) {
      exchange.Send(me - step, part);
      return part;
    }
    const int partner = me + step;
    if (partner >= count) continue;
    std::string upper = exchange.Receive(partner);
    if (HoldsError(part)) continue;  // the lower process's error stands
    if (HoldsError(upper)) {
      part = std::move(upper);
      continue;
    }
    part = Guarded([&]() { return merge(ValueOf(part), ValueOf(upper)); });
  }
  return part;
}

SharedRun::SharedRun(ShareExchange& exchange, std::shared_ptr<const Spill> spill, const Design& design,
                     std::optional<HoldoutSettings> holdout)
    : exchange_(exchange), spill_(std::move(spill)), design_(design), holdout_(holdout) {
  // Every process learns where every process's ranges lie in record order.
  ByteWriter mine;
  mine.U64(spill_->ranges().size());
  for (const SpillRange& range : spill_->ranges()) {
    mine.U64(range.rows_before);
    mine.U64(range.rows);
  }
  const std::vector<std::string> parts = AllGather(exchange_, mine.bytes());
  for (int process = 0; process < exchange_.count(); ++process) {
    ByteReader in(parts[static_cast<std::size_t>(process)]);
    const std::uint64_t ranges = in.U64();
    for (std::uint64_t r = 0; r < ranges; ++r) {
      const std::uint64_t rows_before = in.U64();
      const std::uint64_t rows = in.U64();
      if (rows > 0) layout_.push_back(RangeOwner{rows_before, process, static_cast<std::size_t>(r)});
    }
  }
  std::stable_sort(layout_.begin(), layout_.end(),
                   [](const RangeOwner& a, const RangeOwner& b) { return a.rows_before < b.rows_before; });
}

SharedRun::~SharedRun() {
  if (!driving() || !others_serving_) return;
  try {
    ByteWriter stop;
    stop.U64(static_cast<std::uint64_t>(Request::kStop));
    SendToOthers(stop.bytes());
  } catch (...) {
    // The message layer failed: the cluster library ends the job (MPI's own abort).
  }
}

void SharedRun::SendToOthers(const std::string& request) {
  for (int to = 1; to < exchange_.count(); ++to) exchange_.Send(to, request);
}

PassResult SharedRun::FactorPass(const PassOptions& options) {
  std::string part = Guarded([&]() { return WritePass(RunFactorPass(*spill_, design_, options)); });
  part = ReduceToFirst(exchange_, std::move(part), MergePasses);
  if (!driving()) return PassResult{};
  // From here on the others wait for requests, whatever this process does next.
  others_serving_ = true;
  return ReadPass(Value(part));
}

void SharedRun::Serve(const std::optional<FoldSettings>& folds, const std::optional<BootstrapPassOptions>& bootstrap) {
  for (;;) {
    const std::string request = exchange_.Receive(0);
    ByteReader in(request);
    const auto kind = static_cast<Request>(in.U64());
    switch (kind) {
      case Request::kStop:
        return;
      case Request::kReplayRange: {
        const std::size_t range = static_cast<std::size_t>(in.U64());
        const auto set = static_cast<RowSet>(in.U64());
        const std::size_t columns = design_.column_count();
        ByteWriter batch;
        std::size_t rows = 0;
        auto flush = [&](bool more) {
          ByteWriter head;
          head.U64(more ? 1 : 0);
          head.U64(rows);
          exchange_.Send(0, EncodeValue(head.bytes() + batch.bytes()));
          batch = ByteWriter();
          rows = 0;
        };
        try {
          ForEachUsedRowInRanges(
              *spill_, design_,
              [&](const UsedRow& row) {
                batch.U64(row.row_index);
                batch.U64(row.line);
                batch.U64(row.file);
                batch.Raw(row.x.data(), columns * sizeof(double));
                batch.U64(row.x_low.empty() ? 0 : 1);
                if (!row.x_low.empty()) batch.Raw(row.x_low.data(), columns * sizeof(double));
                batch.F64(row.y);
                batch.F64(row.weight);
                if (++rows == kReplayBatchRows) flush(true);
              },
              holdout_, set, range, range + 1);
          flush(false);
        } catch (...) {
          exchange_.Send(0, EncodeError(std::current_exception()));
        }
        break;
      }
      case Request::kFoldFactors: {
        std::vector<std::size_t> columns(in.U64());
        for (std::size_t& column : columns) column = static_cast<std::size_t>(in.U64());
        std::string part = Guarded([&]() {
          if (!folds) throw std::logic_error("SharedRun::Serve: fold factors asked of a run without folds (a bug)");
          return WriteFactors(BuildFoldFactors(*spill_, design_, columns, *folds, holdout_));
        });
        ReduceToFirst(exchange_, std::move(part), MergeFactorLists);
        break;
      }
      case Request::kBootstrap: {
        std::string part = Guarded([&]() {
          if (!bootstrap) throw std::logic_error("SharedRun::Serve: a bootstrap asked of a run without one (a bug)");
          return WriteFactors(BuildBootstrapFactors(*spill_, design_, *bootstrap));
        });
        ReduceToFirst(exchange_, std::move(part), MergeFactorLists);
        break;
      }
      default:
        throw std::logic_error("SharedRun::Serve: unknown request (a bug)");
    }
  }
}

void SharedRun::ReplayRange(const RangeOwner& owner, RowSet set, const std::function<void(const UsedRow&)>& visit) {
  if (owner.process == 0) {
    ForEachUsedRowInRanges(*spill_, design_, visit, holdout_, set, owner.local_range, owner.local_range + 1);
    return;
  }
  ByteWriter request;
  request.U64(static_cast<std::uint64_t>(Request::kReplayRange));
  request.U64(owner.local_range);
  request.U64(static_cast<std::uint64_t>(set));
  exchange_.Send(owner.process, request.bytes());
  const std::size_t columns = design_.column_count();
  std::vector<double> x(columns), x_low(columns);
  UsedRow row;
  // Every batch is received, even after the visit failed, so that the other process ends its
  // stream; the first failure is thrown once the stream is over.
  std::exception_ptr failure;
  for (bool more = true; more;) {
    const std::string part = exchange_.Receive(owner.process);
    if (HoldsError(part)) {
      if (failure) std::rethrow_exception(failure);
      RethrowPart(part);
    }
    ByteReader in(ValueOf(part));
    more = in.U64() != 0;
    const std::uint64_t rows = in.U64();
    for (std::uint64_t i = 0; i < rows; ++i) {
      row.row_index = in.U64();
      row.line = in.U64();
      row.file = static_cast<std::size_t>(in.U64());
      in.Raw(x.data(), columns * sizeof(double));
      const bool has_low = in.U64() != 0;
      if (has_low) in.Raw(x_low.data(), columns * sizeof(double));
      row.x = x;
      row.x_low = has_low ? std::span<const double>(x_low) : std::span<const double>();
      row.y = in.F64();
      row.weight = in.F64();
      if (failure) continue;
      try {
        visit(row);
      } catch (...) {
        failure = std::current_exception();
      }
    }
  }
  if (failure) std::rethrow_exception(failure);
}

RowReplay SharedRun::Replay(RowSet set) {
  return [this, set](const std::function<void(const UsedRow&)>& visit) {
    for (const RangeOwner& owner : layout_) ReplayRange(owner, set, visit);
  };
}

std::vector<Factor> SharedRun::FoldFactors(std::span<const std::size_t> columns, const FoldSettings& folds) {
  ByteWriter request;
  request.U64(static_cast<std::uint64_t>(Request::kFoldFactors));
  request.U64(columns.size());
  for (std::size_t column : columns) request.U64(column);
  SendToOthers(request.bytes());
  std::string part = Guarded([&]() { return WriteFactors(BuildFoldFactors(*spill_, design_, columns, folds, holdout_)); });
  return ReadFactors(Value(ReduceToFirst(exchange_, std::move(part), MergeFactorLists)));
}

std::vector<Factor> SharedRun::BootstrapFactors(const BootstrapPassOptions& options) {
  ByteWriter request;
  request.U64(static_cast<std::uint64_t>(Request::kBootstrap));
  SendToOthers(request.bytes());
  std::string part = Guarded([&]() { return WriteFactors(BuildBootstrapFactors(*spill_, design_, options)); });
  return ReadFactors(Value(ReduceToFirst(exchange_, std::move(part), MergeFactorLists)));
}

}  // namespace stepledger::run_detail

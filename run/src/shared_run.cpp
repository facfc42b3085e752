#include "shared_run.h"

#include <algorithm>
#include <exception>
#include <stdexcept>
#include <utility>

#include "stepledger/engine/errors.h"

namespace stepledger::run_detail {
namespace {

// What process 0 asks of the others (the first u64 of a request).
enum class Request : std::uint64_t { kStop = 1, kFoldFactors, kBootstrap, kSums, kDiagnoseRange, kEvaluateRange };

// Records per message of a streamed range (80 bytes or fewer each): neither side holds more than
// one batch.
constexpr std::size_t kStreamBatchRecords = 4096;

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

// One row's diagnostic and weight, exactly (optional values with a flag each).
void WriteDiagnostic(ByteWriter& out, const RowDiagnostic& row, double weight) {
  out.U64(row.row_index);
  out.U64(row.line);
  out.U64(row.file);
  out.F64(row.fitted);
  out.F64(row.residual);
  out.F64(row.leverage);
  out.U64((row.standardized_residual ? 1 : 0) | (row.cooks_distance ? 2 : 0));
  out.F64(row.standardized_residual.value_or(0));
  out.F64(row.cooks_distance.value_or(0));
  out.F64(weight);
}

RowDiagnostic ReadDiagnostic(ByteReader& in, double& weight) {
  RowDiagnostic row;
  row.row_index = in.U64();
  row.line = in.U64();
  row.file = static_cast<std::size_t>(in.U64());
  row.fitted = in.F64();
  row.residual = in.F64();
  row.leverage = in.F64();
  const std::uint64_t defined = in.U64();
  const double standardized = in.F64();
  const double cooks = in.F64();
  if ((defined & 1) != 0) row.standardized_residual = standardized;
  if ((defined & 2) != 0) row.cooks_distance = cooks;
  weight = in.F64();
  return row;
}

void WriteExtents(ByteWriter& out, const ColumnExtents& extents) {
  for (std::size_t i = 0; i < extents.low.size(); ++i) {
    out.F64(extents.low[i]);
    out.F64(extents.high[i]);
  }
}

ColumnExtents ReadExtents(ByteReader& in, std::size_t columns) {
  ColumnExtents extents(columns);
  for (std::size_t i = 0; i < columns; ++i) {
    extents.low[i] = in.F64();
    extents.high[i] = in.F64();
  }
  return extents;
}

// Sums of neighbouring groups of processes (RowSums::Add: double-double).
std::string MergeSums(std::string_view lower, std::string_view upper) {
  RowSums sums = RowSums::Read(lower);
  sums.Add(RowSums::Read(upper));
  return sums.Write();
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
      case Request::kDiagnoseRange: {
        const std::size_t range = static_cast<std::size_t>(in.U64());
        const auto set = static_cast<RowSet>(in.U64());
        const std::string diagnoser = in.Text();
        std::vector<std::size_t> extent_columns(in.U64());
        for (std::size_t& column : extent_columns) column = static_cast<std::size_t>(in.U64());
        ColumnExtents extents(extent_columns.size());
        StreamRange(
            [&](ByteWriter& batch, const std::function<void()>& written) {
              extents = DiagnoseHere(RangeRows(range, set))(RowDiagnoser::Read(diagnoser), extent_columns,
                                                            [&](const RowDiagnostic& row, double weight) {
                                                              WriteDiagnostic(batch, row, weight);
                                                              written();
                                                            });
            },
            [&](ByteWriter& tail) { WriteExtents(tail, extents); });
        break;
      }
      case Request::kEvaluateRange: {
        const std::size_t range = static_cast<std::size_t>(in.U64());
        const auto set = static_cast<RowSet>(in.U64());
        const std::string evaluator = in.Text();
        StreamRange(
            [&](ByteWriter& batch, const std::function<void()>& written) {
              EvaluateHere(RangeRows(range, set))(HeldOutEvaluator::Read(evaluator), [&](const HeldOutRow& row) {
                WriteHeldOutRow(batch, row);
                written();
              });
            },
            [](ByteWriter&) {});
        break;
      }
      case Request::kSums: {
        const auto set = static_cast<RowSet>(in.U64());
        const std::string recipe = in.Text();
        ReduceToFirst(exchange_, Guarded([&]() { return OwnSums(recipe, set).Write(); }), MergeSums);
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

RowReplay SharedRun::RangeRows(std::size_t range, RowSet set) const {
  return [this, range, set](const std::function<void(const UsedRow&)>& visit) {
    ForEachUsedRowInRanges(*spill_, design_, visit, holdout_, set, range, range + 1);
  };
}

void SharedRun::StreamRange(const std::function<void(ByteWriter& batch, const std::function<void()>& written)>& produce,
                            const std::function<void(ByteWriter&)>& tail) {
  ByteWriter batch;
  std::size_t records = 0;
  auto flush = [&](bool more) {
    ByteWriter head;
    head.U64(more ? 1 : 0);
    head.U64(records);
    if (!more) tail(batch);
    exchange_.Send(0, EncodeValue(head.bytes() + batch.bytes()));
    batch = ByteWriter();
    records = 0;
  };
  try {
    produce(batch, [&]() {
      if (++records == kStreamBatchRecords) flush(true);
    });
    flush(false);
  } catch (...) {
    exchange_.Send(0, EncodeError(std::current_exception()));
  }
}

void SharedRun::ReceiveRange(int process, const std::function<void(ByteReader&, bool visit)>& read,
                             const std::function<void(ByteReader&)>& read_tail) {
  // Every batch is received, even after a visit failed, so that the other process ends its
  // stream; the first failure is thrown once the stream is over.
  std::exception_ptr failure;
  for (bool more = true; more;) {
    const std::string part = exchange_.Receive(process);
    if (HoldsError(part)) {
      if (failure) std::rethrow_exception(failure);
      RethrowPart(part);
    }
    ByteReader in(ValueOf(part));
    more = in.U64() != 0;
    const std::uint64_t rows = in.U64();
    for (std::uint64_t i = 0; i < rows; ++i) {
      if (failure) {
        read(in, false);  // past the records of a stream whose visits are over
        continue;
      }
      try {
        read(in, true);
      } catch (...) {
        failure = std::current_exception();
      }
    }
    if (!more && !failure) read_tail(in);
  }
  if (failure) std::rethrow_exception(failure);
}

RowSums SharedRun::OwnSums(std::string_view recipe, RowSet set) const {
  const std::unique_ptr<RowSumKernel> kernel = MakeRowSumKernel(recipe);
  ForEachUsedRow(*spill_, design_, [&kernel](const UsedRow& row) { kernel->Add(row); }, holdout_, set);
  return kernel->Finish();
}

SummingReplay SharedRun::Sums(RowSet set) {
  return [this, set](std::string_view recipe) {
    ByteWriter request;
    request.U64(static_cast<std::uint64_t>(Request::kSums));
    request.U64(static_cast<std::uint64_t>(set));
    request.Text(recipe);
    SendToOthers(request.bytes());
    std::string part = Guarded([&]() { return OwnSums(recipe, set).Write(); });
    return RowSums::Read(Value(ReduceToFirst(exchange_, std::move(part), MergeSums)));
  };
}

void SharedRun::InRecordOrder(std::uint64_t request_kind, RowSet set, const std::string& request_body,
                              const std::function<void(std::size_t local_range)>& own,
                              const std::function<void(ByteReader&, bool visit)>& read,
                              const std::function<void(ByteReader&)>& read_tail) {
  for (const RangeOwner& owner : layout_) {
    if (owner.process == 0) {
      own(owner.local_range);
      continue;
    }
    ByteWriter request;
    request.U64(request_kind);
    request.U64(owner.local_range);
    request.U64(static_cast<std::uint64_t>(set));
    exchange_.Send(owner.process, request.bytes() + request_body);
    ReceiveRange(owner.process, read, read_tail);
  }
}

DiagnosingReplay SharedRun::Diagnosing(RowSet set) {
  return [this, set](const RowDiagnoser& diagnoser, std::span<const std::size_t> extent_columns,
                     const std::function<void(const RowDiagnostic&, double)>& visit) {
    ColumnExtents extents(extent_columns.size());
    ByteWriter body;
    body.Text(diagnoser.Write());
    body.U64(extent_columns.size());
    for (std::size_t column : extent_columns) body.U64(column);
    InRecordOrder(
        static_cast<std::uint64_t>(Request::kDiagnoseRange), set, body.bytes(),
        [&](std::size_t range) { extents.Widen(DiagnoseHere(RangeRows(range, set))(diagnoser, extent_columns, visit)); },
        [&](ByteReader& in, bool visiting) {
          double weight = 0;
          const RowDiagnostic diagnostic = ReadDiagnostic(in, weight);
          if (visiting) visit(diagnostic, weight);
        },
        [&](ByteReader& in) { extents.Widen(ReadExtents(in, extent_columns.size())); });
    return extents;
  };
}

HeldOutReplay SharedRun::EvaluatingHeldOut() {
  return [this](const HeldOutEvaluator& evaluator, const std::function<void(const HeldOutRow&)>& visit) {
    ByteWriter body;
    body.Text(evaluator.Write());
    InRecordOrder(
        static_cast<std::uint64_t>(Request::kEvaluateRange), RowSet::kHeldOutRows, body.bytes(),
        [&](std::size_t range) { EvaluateHere(RangeRows(range, RowSet::kHeldOutRows))(evaluator, visit); },
        [&](ByteReader& in, bool visiting) {
          const HeldOutRow row = ReadHeldOutRow(in);
          if (visiting) visit(row);
        },
        [](ByteReader&) {});
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

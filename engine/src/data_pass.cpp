#include "stepledger/engine/data_pass.h"

#include <algorithm>
#include <condition_variable>
#include <deque>
#include <exception>
#include <mutex>
#include <optional>
#include <thread>
#include <utility>
#include <vector>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

void ValidatePassOptions(const PassOptions& options) {
  if (options.threads < 1) {
    throw InputError("threads: expected an integer >= 1, found " + std::to_string(options.threads));
  }
  if (options.block_rows < 1) throw InputError("block_rows: expected an integer >= 1, found 0");
}

void Count(RowAccounting& accounting, const RowOutcome& outcome) {
  ++accounting.rows_read;
  if (outcome.used) {
    ++accounting.rows_used;
  } else {
    accounting.CountDropped(outcome.reason, outcome.column);
  }
}

// Rows expanded on the reading thread, handed to one worker: per row the m design values,
// then y, then the weight.
struct RowBlock {
  std::vector<double> values;
  std::size_t rows = 0;
};

// A small blocking queue; capacity bounds the memory held by blocks in flight.
template <typename T>
class BlockingQueue {
 public:
  void Push(T item) {
    std::unique_lock lock(mutex_);
    items_.push_back(std::move(item));
    ready_.notify_one();
  }
  T Pop() {
    std::unique_lock lock(mutex_);
    ready_.wait(lock, [&] { return !items_.empty(); });
    T item = std::move(items_.front());
    items_.pop_front();
    return item;
  }

 private:
  std::mutex mutex_;
  std::condition_variable ready_;
  std::deque<T> items_;
};

PassResult RunSingleThreaded(CsvReader& reader, const Design& design, const PassOptions& options) {
  PassResult result;
  FactorBuilder builder(design.scales(), options.block_rows);
  CsvRecord record;
  std::vector<double> x(design.column_count());
  double y = 0, w = 1;
  while (reader.Next(record)) {
    const RowOutcome outcome = design.Expand(reader, record, x, y, w);
    Count(result.accounting, outcome);
    if (outcome.used) builder.AddRow(x, y, w);
  }
  result.factor = builder.Finish();
  return result;
}

// The reading thread parses and expands; block b of block_rows used rows goes to worker
// b % threads, which folds it into its own builder. Blocks circulate through a free list of
// 2 per worker, so memory stays bounded whatever the file size; the reader waits when all
// are in flight. Workers merge in worker order at the end: a given thread count always gives
// the same bits.
PassResult RunThreaded(CsvReader& reader, const Design& design, const PassOptions& options) {
  const std::size_t threads = static_cast<std::size_t>(options.threads);
  const std::size_t m = design.column_count();
  const std::size_t stride = m + 2;
  const std::vector<double> scales = design.scales();

  BlockingQueue<RowBlock> free_blocks;
  for (std::size_t i = 0; i < 2 * threads; ++i) {
    RowBlock block;
    block.values.resize(options.block_rows * stride);
    free_blocks.Push(std::move(block));
  }
  std::vector<BlockingQueue<std::optional<RowBlock>>> work(threads);
  std::vector<FactorBuilder> builders;
  builders.reserve(threads);
  for (std::size_t t = 0; t < threads; ++t) builders.emplace_back(scales, options.block_rows);
  std::vector<std::exception_ptr> worker_errors(threads);
  std::mutex failure_mutex;
  bool worker_failed = false;

  std::vector<std::thread> workers;
  workers.reserve(threads);
  for (std::size_t t = 0; t < threads; ++t) {
    workers.emplace_back([&, t] {
      bool failed = false;
      for (;;) {
        std::optional<RowBlock> block = work[t].Pop();
        if (!block) break;
        if (!failed) {
          try {
            for (std::size_t r = 0; r < block->rows; ++r) {
              const double* row = block->values.data() + r * stride;
              builders[t].AddRow(std::span<const double>(row, m), row[m], row[m + 1]);
            }
          } catch (...) {
            failed = true;
            worker_errors[t] = std::current_exception();
            std::lock_guard lock(failure_mutex);
            worker_failed = true;
          }
        }
        // Always hand the block back, so the reader never waits for a failed worker.
        block->rows = 0;
        free_blocks.Push(std::move(*block));
      }
    });
  }

  PassResult result;
  std::exception_ptr reader_error;
  try {
    CsvRecord record;
    double y = 0, w = 1;
    std::size_t next_worker = 0;
    RowBlock current = free_blocks.Pop();
    auto any_worker_failed = [&] {
      std::lock_guard lock(failure_mutex);
      return worker_failed;
    };
    while (reader.Next(record)) {
      double* row = current.values.data() + current.rows * stride;
      const RowOutcome outcome = design.Expand(reader, record, std::span<double>(row, m), y, w);
      Count(result.accounting, outcome);
      if (!outcome.used) continue;
      row[m] = y;
      row[m + 1] = w;
      if (++current.rows == options.block_rows) {
        work[next_worker].Push(std::move(current));
        next_worker = (next_worker + 1) % threads;
        if (any_worker_failed()) break;
        current = free_blocks.Pop();
      }
    }
    if (current.rows > 0 && !any_worker_failed()) work[next_worker].Push(std::move(current));
  } catch (...) {
    reader_error = std::current_exception();
  }
  for (std::size_t t = 0; t < threads; ++t) work[t].Push(std::nullopt);
  for (auto& worker : workers) worker.join();
  if (reader_error) std::rethrow_exception(reader_error);
  for (const auto& error : worker_errors) {
    if (error) std::rethrow_exception(error);
  }
  for (std::size_t t = 1; t < threads; ++t) builders[0].Merge(std::move(builders[t]));
  result.factor = builders[0].Finish();
  return result;
}

}  // namespace

void RowAccounting::CountDropped(DropReason reason, std::string_view column) {
  auto before = [&](const RowDrop& entry) {
    return entry.reason != reason ? entry.reason < reason : std::string_view(entry.column) < column;
  };
  auto place = std::find_if_not(rows_dropped.begin(), rows_dropped.end(), before);
  if (place == rows_dropped.end() || place->reason != reason || place->column != column) {
    place = rows_dropped.insert(place, RowDrop{reason, std::string(column), 0});
  }
  ++place->rows;
}

std::uint64_t RowAccounting::RowsDroppedTotal() const {
  std::uint64_t total = 0;
  for (const RowDrop& entry : rows_dropped) total += entry.rows;
  return total;
}

PassResult RunFactorPass(const std::filesystem::path& path, const Design& design,
                         const PassOptions& options,
                         std::function<void(std::string_view)> byte_observer) {
  ValidatePassOptions(options);
  CsvReader reader(path, options.csv);
  if (byte_observer) reader.SetByteObserver(std::move(byte_observer));
  design.CheckHeader(reader);
  if (options.threads == 1) return RunSingleThreaded(reader, design, options);
  return RunThreaded(reader, design, options);
}

void ForEachUsedRow(const std::filesystem::path& path, const Design& design,
                    const CsvOptions& csv, const std::function<void(const UsedRow&)>& visit) {
  CsvReader reader(path, csv);
  design.CheckHeader(reader);
  CsvRecord record;
  std::vector<double> x(design.column_count());
  // Low-order parts only when a power makes them nonzero (UsedRow: empty means all zero).
  std::vector<double> x_low(design.HasLowOrderParts() ? design.column_count() : 0);
  UsedRow row;
  while (reader.Next(record)) {
    const RowOutcome outcome = design.Expand(reader, record, x, row.y, row.weight, x_low);
    if (!outcome.used) continue;
    row.row_index = record.row_index;
    row.line = record.line;
    row.x = x;
    row.x_low = x_low;
    visit(row);
  }
}

RowReplay FileRowReplay(std::filesystem::path path, const Design& design, CsvOptions csv) {
  return [path = std::move(path), design, csv = std::move(csv)](
             const std::function<void(const UsedRow&)>& visit) {
    ForEachUsedRow(path, design, csv, visit);
  };
}

}  // namespace stepledger

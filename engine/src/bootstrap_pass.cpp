#include "stepledger/engine/bootstrap_pass.h"

#include <algorithm>
#include <exception>
#include <mutex>
#include <stdexcept>
#include <thread>

#include "lapack.h"
#include "stepledger/engine/data_pass.h"

namespace stepledger {

std::uint64_t BootstrapFactorBytes(std::size_t design_columns, std::size_t replicates, std::size_t block_rows) {
  const std::uint64_t columns = design_columns + 1;
  return static_cast<std::uint64_t>(replicates) * (columns * columns + block_rows * columns) * sizeof(double);
}

namespace {

// One batch of used rows, copied out of the spill so that every thread can read it.
struct RowBatch {
  std::size_t columns = 0;
  std::vector<double> x;              // rows x columns, row-major
  std::vector<double> y, weight;
  std::vector<std::uint64_t> hash;    // RecordHash(bootstrap seed, record index)
  std::size_t size() const { return y.size(); }
  void Clear() { x.clear(); y.clear(); weight.clear(); hash.clear(); }
};

// Folds the batch into the replicates a thread owns (r = first, first + stride, ...): for each
// replicate the batch's rows in file order, so that its builder sees the same sequence of rows
// whatever the thread count.
void FoldBatch(const RowBatch& batch, std::vector<FactorBuilder>& builders, std::size_t first, std::size_t stride) {
  for (std::size_t r = first; r < builders.size(); r += stride) {
    FactorBuilder& builder = builders[r];
    for (std::size_t i = 0; i < batch.size(); ++i) {
      const unsigned copies = PoissonDraws::CountOfHash(batch.hash[i], r);
      if (copies == 0) continue;
      builder.AddRepeatedRow(std::span<const double>(batch.x.data() + i * batch.columns, batch.columns), batch.y[i],
                             batch.weight[i], copies);
    }
  }
}

}  // namespace

std::vector<Factor> BuildBootstrapFactors(const Spill& spill, const Design& design,
                                          const BootstrapPassOptions& options) {
  const std::size_t replicates = options.settings.replicates;
  if (replicates == 0) throw std::invalid_argument("BuildBootstrapFactors: replicates must be at least 1");
  if (options.threads < 1 || options.block_rows == 0 || options.batch_rows == 0) {
    throw std::invalid_argument("BuildBootstrapFactors: threads, block_rows and batch_rows must be at least 1");
  }
  // Each thread folds with LAPACK itself: a threaded BLAS under it would only oversubscribe.
  lapack::UseOneBlasThread();
  const std::vector<double> scales = design.scales();
  std::vector<FactorBuilder> builders;
  builders.reserve(replicates);
  for (std::size_t r = 0; r < replicates; ++r) builders.emplace_back(scales, options.block_rows, false);

  const std::size_t workers = std::min<std::size_t>(static_cast<std::size_t>(options.threads), replicates);
  RowBatch batch;
  batch.columns = design.column_count();
  batch.x.reserve(options.batch_rows * batch.columns);
  std::uint64_t rows_done = 0;
  auto fold = [&] {
    if (batch.size() == 0) return;
    std::exception_ptr failure;
    std::mutex failure_mutex;
    {
      std::vector<std::jthread> helpers;
      helpers.reserve(workers - 1);
      for (std::size_t t = 1; t < workers; ++t) {
        helpers.emplace_back([&, t] {
          try {
            FoldBatch(batch, builders, t, workers);
          } catch (...) {
            const std::lock_guard<std::mutex> lock(failure_mutex);
            if (!failure) failure = std::current_exception();
          }
        });
      }
      FoldBatch(batch, builders, 0, workers);
    }  // joins the helpers
    if (failure) std::rethrow_exception(failure);
    rows_done += batch.size();
    batch.Clear();
    if (options.progress) options.progress(rows_done);
  };
  const std::uint64_t seed = options.settings.seed;
  ForEachUsedRow(
      spill, design,
      [&](const UsedRow& row) {
        batch.x.insert(batch.x.end(), row.x.begin(), row.x.end());
        batch.y.push_back(row.y);
        batch.weight.push_back(row.weight);
        batch.hash.push_back(RecordHash(seed, row.row_index));
        if (batch.size() == options.batch_rows) fold();
      },
      options.holdout, RowSet::kModelRows);
  fold();

  std::vector<Factor> factors;
  factors.reserve(replicates);
  for (FactorBuilder& builder : builders) factors.push_back(builder.Finish());
  return factors;
}

}  // namespace stepledger

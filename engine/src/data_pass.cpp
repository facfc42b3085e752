#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/linear_algebra_threads.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <charconv>
#include <cmath>
#include <exception>
#include <stdexcept>
#include <optional>
#include <utility>
#include <vector>

#include "design_expand.h"
#include "file_identity.h"
#include "lapack.h"
#include "thread_start.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/table_scan.h"

namespace stepledger {
namespace {

void ValidatePassOptions(const PassOptions& options) {
  if (options.threads < 1) {
    throw InputError("threads: expected an integer >= 1, found " + std::to_string(options.threads));
  }
  if (options.block_rows < 1) throw InputError("block_rows: expected an integer >= 1, found 0");
}

// Counts a row and says whether it belongs to the set the caller wants (used rows: the model's
// rows or the held-out ones).
bool CountAndSelect(RowAccounting& accounting, const RowOutcome& outcome, std::uint64_t record,
                    const std::optional<HoldoutSettings>& holdout, RowSet set) {
  ++accounting.rows_read;
  if (!outcome.used) {
    accounting.CountDropped(outcome.reason, outcome.column);
    return false;
  }
  const bool held_out = holdout && IsHeldOut(*holdout, record);
  if (held_out) {
    ++accounting.rows_held_out;
  } else {
    ++accounting.rows_used;
  }
  return held_out == (set == RowSet::kHeldOutRows);
}

// The level offsets of every categorical cell of the design for every range of the spill:
// levels[range][cell][code] is the offset among the term's columns (kNoTerm: the baseline) or
// kUnseenLevel. Bounded by ranges x cells x levels.
constexpr std::size_t kUnseenLevel = kNoTerm - 1;
using LevelTables = std::vector<std::vector<std::vector<std::size_t>>>;

LevelTables MakeLevelTables(const Spill& spill, const Design& design) {
  LevelTables tables(spill.ranges().size());
  for (std::size_t r = 0; r < spill.ranges().size(); ++r) {
    tables[r].resize(design.source.cells.size());
    for (std::size_t c = 0; c < design.source.cells.size(); ++c) {
      const Design::Source::Cell& cell = design.source.cells[c];
      if (!cell.categorical) continue;
      const auto& index = design.source.level_index[cell.term];
      const auto& texts = spill.ranges()[r].levels[static_cast<std::size_t>(cell.header_index)];
      std::vector<std::size_t>& table = tables[r][c];
      table.reserve(texts.size());
      for (const std::string& text : texts) {
        const auto found = index.find(text);
        table.push_back(found == index.end() ? kUnseenLevel : found->second);
      }
    }
  }
  return tables;
}

// The cell's text and place, read again from the data file for a message, when the file is a
// plain regular file that has not changed since the scan; nullopt otherwise.
struct RereadCell {
  std::uint64_t line = 0;
  std::uint64_t column = 0;
  std::string text;
};

std::optional<RereadCell> Reread(const SpillSource& source, std::uint64_t offset, std::uint64_t line,
                                 std::size_t header_index) {
  if (!source.rereadable) return std::nullopt;
  try {
    const int fd = ::open(source.path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd < 0) return std::nullopt;
    struct FdCloser {
      int fd;
      ~FdCloser() { ::close(fd); }
    } closer{fd};
    FileIdentity scanned;
    scanned.device = source.device;
    scanned.inode = source.inode;
    scanned.size = source.size;
    scanned.modified_ns = source.modified_ns;
    if (!(IdentityOf(fd, source.display_name) == scanned)) return std::nullopt;
    CsvOptions csv;
    csv.delimiter = source.delimiter;
    csv.block_bytes = 1 << 16;
    CsvReader reader(source.path, fd, CsvRange{offset, offset + 1, source.header}, csv);
    CsvRecord record;
    if (!reader.Next(record) || header_index >= record.fields.size()) return std::nullopt;
    const CsvField& field = record.fields[header_index];
    return RereadCell{line + field.line - 1, field.column, std::string(field.text)};
  } catch (const std::exception&) {
    return std::nullopt;
  }
}

// The cells of one spill row, for design_detail::ExpandRow.
class SpillCells {
 public:
  SpillCells(const Design& design, const Spill& spill, const LevelTables& tables)
      : design_(design), spill_(spill), tables_(tables) {}
  void Point(const SpillChunk& chunk, std::size_t row) {
    chunk_ = &chunk;
    row_ = row;
  }
  CellKind Classify(std::size_t cell, double& value) const {
    value = chunk_->values(HeaderIndex(cell))[row_];
    const std::uint64_t bits = SpillBits(value);
    if (bits == kSpillMissingBits) return CellKind::kMissing;
    if (bits == kSpillTextBits) return CellKind::kText;
    return CellKind::kNumber;
  }
  bool Level(std::size_t cell, std::size_t& offset) const {
    const std::uint32_t* codes = chunk_->codes[HeaderIndex(cell)];
    if (codes == nullptr) {
      throw std::logic_error("the typed spill holds no level codes for column '" +
                             design_.source.cells[cell].column_name + "'");
    }
    const std::vector<std::size_t>& table = tables_[chunk_->range][cell];
    const std::uint32_t code = codes[row_];
    if (code >= table.size() || table[code] == kUnseenLevel) return false;
    offset = table[code];
    return true;
  }
  template <typename Detail>
  [[noreturn]] void Fail(std::size_t cell, const Detail& detail) const {
    const SpillSource& source = spill_.source_of_range(chunk_->range);
    const std::size_t header_index = HeaderIndex(cell);
    const std::uint64_t line = Line();
    if (auto reread = Reread(source, chunk_->offsets[row_], line, header_index)) {
      throw LocatedInputError(source.display_name, reread->line, reread->column, detail(reread->text));
    }
    // The text cannot be read again (a pipe, a compressed or a changed file): quote the value.
    const double value = chunk_->values(header_index)[row_];
    char text[32];
    const auto written = std::to_chars(text, text + sizeof text, value);
    throw LocatedInputError(source.display_name, line, 0,
                            detail(std::string_view(text, static_cast<std::size_t>(written.ptr - text))));
  }
  std::uint64_t RowIndex() const {
    return spill_.ranges()[chunk_->range].rows_before + chunk_->first_row + row_;
  }
  std::uint64_t Line() const { return spill_.ranges()[chunk_->range].lines_before + chunk_->lines[row_]; }
  std::size_t File() const { return spill_.ranges()[chunk_->range].source; }

 private:
  std::size_t HeaderIndex(std::size_t cell) const {
    return static_cast<std::size_t>(design_.source.cells[cell].header_index);
  }
  const Design& design_;
  const Spill& spill_;
  const LevelTables& tables_;
  const SpillChunk* chunk_ = nullptr;
  std::size_t row_ = 0;
};

// The check of the passes this thread runs (PassCheckScope), or null.
thread_local const PassCheck* current_pass_check = nullptr;

// Reads chunks [first, last) and calls on_row(cells, outcome, x, y, w, x_low) for every row.
// Before each chunk: returns when *stop is set (a check stopped another share of the pass), and
// calls this thread's PassCheck; when that throws, sets *stop and lets the error go on. Other
// errors do not set it, so that the first error in file order is the one reported whatever the
// timing of the threads.
template <typename OnRow>
void ForEachRow(const Spill& spill, const Design& design, const LevelTables& tables, std::uint64_t first,
                std::uint64_t last, bool low_parts, const OnRow& on_row, const char* pass,
                std::atomic<bool>* stop = nullptr) {
  const PassCheck* check = current_pass_check;
  SpillReader reader(spill, first, last);
  SpillCells cells(design, spill, tables);
  SpillChunk chunk;
  std::vector<double> x(design.column_count());
  std::vector<double> x_low(low_parts && design.HasLowOrderParts() ? design.column_count() : 0);
  double y = 0, w = 1;
  std::uint64_t done = 0;
  while (true) {
    if (stop != nullptr && stop->load(std::memory_order_relaxed)) return;
    if (check != nullptr) {
      try {
        (*check)(PassProgress{pass, done, last - first});
      } catch (...) {
        if (stop != nullptr) stop->store(true, std::memory_order_relaxed);
        throw;
      }
    }
    if (!reader.Next(chunk)) break;
    ++done;
    for (std::size_t row = 0; row < chunk.rows; ++row) {
      cells.Point(chunk, row);
      const RowOutcome outcome = design_detail::ExpandRow(design, cells, x, y, w, x_low);
      on_row(cells, outcome, x, y, w, x_low);
    }
  }
}

}  // namespace

PassCheckScope::PassCheckScope(PassCheck check) : check_(std::move(check)), previous_(current_pass_check) {
  current_pass_check = check_ ? &check_ : nullptr;
}

PassCheckScope::~PassCheckScope() { current_pass_check = previous_; }

void RowAccounting::Add(const RowAccounting& other) {
  rows_read += other.rows_read;
  rows_used += other.rows_used;
  rows_held_out += other.rows_held_out;
  for (const RowDrop& entry : other.rows_dropped) CountDropped(entry.reason, entry.column, entry.rows);
}

void RowAccounting::CountDropped(DropReason reason, std::string_view column, std::uint64_t rows) {
  auto before = [&](const RowDrop& entry) {
    return entry.reason != reason ? entry.reason < reason : std::string_view(entry.column) < column;
  };
  auto place = std::find_if_not(rows_dropped.begin(), rows_dropped.end(), before);
  if (place == rows_dropped.end() || place->reason != reason || place->column != column) {
    place = rows_dropped.insert(place, RowDrop{reason, std::string(column), 0});
  }
  place->rows += rows;
}

std::uint64_t RowAccounting::RowsDroppedTotal() const {
  std::uint64_t total = 0;
  for (const RowDrop& entry : rows_dropped) total += entry.rows;
  return total;
}

std::uint64_t FoldFactorBytes(std::size_t design_columns, std::size_t folds, int threads, std::size_t block_rows) {
  const std::uint64_t width = design_columns + 1;
  const std::uint64_t triangle = width * width * sizeof(double);
  const std::uint64_t builder = triangle + static_cast<std::uint64_t>(block_rows) * width * sizeof(double);
  // Every thread's builders, then the finished fold factors and the training triangles.
  return folds * (static_cast<std::uint64_t>(std::max(threads, 1)) * builder + 2 * triangle);
}

PassResult RunFactorPass(const Spill& spill, const Design& design, const PassOptions& options) {
  ValidatePassOptions(options);
  if (options.folds && (options.folds->k < kMinFolds || options.folds->k > kMaxFolds)) {
    throw InputError("folds: expected an integer from " + std::to_string(kMinFolds) + " to " +
                     std::to_string(kMaxFolds) + ", found " + std::to_string(options.folds->k));
  }
  lapack::UseOneBlasThread();
  design.CheckHeader(spill.source().header, spill.source().display_name);
  const LevelTables tables = MakeLevelTables(spill, design);
  const std::uint64_t chunks = spill.chunk_count();
  const std::size_t workers =
      static_cast<std::size_t>(std::max<std::uint64_t>(1, std::min<std::uint64_t>(options.threads, chunks)));
  const std::vector<double> scales = design.scales();
  // builders[t][f]: thread t's factor of fold f (one factor per thread without folds).
  const std::size_t per_thread = options.folds ? options.folds->k : 1;
  std::vector<std::vector<FactorBuilder>> builders(workers);
  for (auto& thread_builders : builders) {
    thread_builders.reserve(per_thread);
    for (std::size_t f = 0; f < per_thread; ++f) thread_builders.emplace_back(scales, options.block_rows);
  }
  std::vector<RowAccounting> accounting(workers);
  std::vector<std::exception_ptr> errors(workers);
  std::atomic<bool> stop{false};  // the check stopped a share: the others stop too
  auto fold_share = [&](std::size_t t) {
    try {
      ForEachRow(spill, design, tables, chunks * t / workers, chunks * (t + 1) / workers, false,
                 [&](const SpillCells& cells, const RowOutcome& outcome, std::span<const double> x, double y,
                     double w, std::span<const double>) {
                   const std::uint64_t record = cells.RowIndex();
                   if (!CountAndSelect(accounting[t], outcome, record, options.holdout, RowSet::kModelRows)) return;
                   const std::size_t fold =
                       options.folds ? FoldOfRecord(options.folds->seed, record, options.folds->k) : 0;
                   builders[t][fold].AddRow(x, y, w);
                 },
                 "factor pass", &stop);
    } catch (...) {
      errors[t] = std::current_exception();
    }
  };
  // Each thread inside LAPACK needs a work buffer of OpenBLAS's (engine/src/lapack.h): under an
  // address-space limit, fewer shares run at once (the same shares: the same bits).
  const std::size_t at_once = ThreadsForLinearAlgebra(workers, "the factor pass");
  if (workers == 1) {
    fold_share(0);
  } else {
    detail::RunTasks(workers, fold_share, "the factor pass", at_once,
                     "the address-space limit (ulimit -v) leaves room for the linear algebra of " +
                         std::to_string(at_once) + (at_once == 1 ? " thread" : " threads") +
                         " (OpenBLAS's work buffer: about " + std::to_string(lapack::kLapackCallerBytes >> 20) +
                         " MB each)");
  }
  // The first error in file order: the shares are contiguous and in order.
  for (const auto& error : errors) {
    if (error) std::rethrow_exception(error);
  }
  PassResult result;
  for (std::size_t t = 0; t < workers; ++t) result.accounting.Add(accounting[t]);
  std::vector<Factor> factors;
  factors.reserve(per_thread);
  for (std::size_t f = 0; f < per_thread; ++f) {
    for (std::size_t t = 1; t < workers; ++t) builders[0][f].Merge(std::move(builders[t][f]));
    factors.push_back(builders[0][f].Finish());
  }
  // The factor of all the rows: the folds merged in fold order (each row was folded once).
  result.factor = factors[0];
  for (std::size_t f = 1; f < factors.size(); ++f) result.factor = MergeFactors(result.factor, factors[f]);
  if (options.folds) result.fold_factors = std::move(factors);
  return result;
}

namespace {

std::string ShortestText(double value) {
  char text[32];
  const auto written = std::to_chars(text, text + sizeof text, value);
  return std::string(text, static_cast<std::size_t>(written.ptr - text));
}

std::string Rows(std::uint64_t count) { return FormatCount(static_cast<std::int64_t>(count)) + (count == 1 ? " row" : " rows"); }

}  // namespace

void RequireSomethingToFit(const PassResult& pass, const Design& design, const std::string& data_name) {
  const RowAccounting& rows = pass.accounting;
  if (rows.rows_used == 0) {
    if (rows.rows_read == 0) {
      throw InputError(data_name + ": the file has no data rows (a header alone): nothing to fit");
    }
    if (rows.rows_held_out > 0) {
      throw InputError(data_name + ": no row is left to fit: all " + Rows(rows.rows_held_out) +
                       " that could be used were drawn into the holdout; lower holdout.fraction or use more rows");
    }
    std::string reasons;
    for (const RowDrop& drop : rows.rows_dropped) {
      reasons += (reasons.empty() ? "" : ", ") + FormatCount(static_cast<std::int64_t>(drop.rows)) +
                 (drop.reason == DropReason::kZeroWeight ? " with weight 0 in column '"
                                                         : " with a missing cell in column '") +
                 QuoteForMessage(drop.column) + "'";
    }
    throw InputError(data_name + ": no row can be used: all " + Rows(rows.rows_read) +
                     " read were dropped (" + reasons +
                     "); a row is left out when its weight is 0 or a column the plan reads is "
                     "empty or a missing token there");
  }
  if (pass.factor.column_stats.empty()) return;
  const RunningStats& response = pass.factor.column_stats.back();
  const bool logged = design.response_transform == ResponseTransform::kLog;
  // On the response's own scale (the factor holds the log under "log"; exp of it to 12 digits).
  auto shown = [&](double value) {
    if (!logged) return ShortestText(value);
    char text[32];
    const auto written = std::to_chars(text, text + sizeof text, std::exp(value), std::chars_format::general, 12);
    return std::string(text, static_cast<std::size_t>(written.ptr - text));
  };
  const std::string subject = "response '" + QuoteForMessage(design.response) + "'";
  const std::string used = "in the " + Rows(rows.rows_used) + " used";
  if (response.min == 0 && response.max == 0) {
    throw InputError(data_name + ": " + subject + " is " + shown(0) + " " + used +
                     ": there is nothing to fit; check the response column" +
                     (rows.RowsDroppedTotal() > 0 ? " and the rows dropped" : ""));
  }
  if (!design.intercept) return;
  const double magnitude = std::max(std::fabs(response.min), std::fabs(response.max));
  if (response.max - response.min > kConstantResponseSpread * magnitude) return;
  const std::string values = response.min == response.max
                                 ? "is " + shown(response.min) + " " + used
                                 : "only varies from " + shown(response.min) + " to " + shown(response.max) + " " +
                                       used + " (by less than 1e-12 of its size: rounding, not data)";
  throw InputError(data_name + ": " + subject + " " + values +
                   ": with an intercept there is nothing left to explain, and any search would follow "
                   "rounding errors; check the response column" +
                   (rows.RowsDroppedTotal() > 0 ? " and the rows dropped (" +
                                                      Rows(rows.RowsDroppedTotal()) + ")"
                                                : std::string()));
}

namespace {

ScanResult ScanForPass(const std::filesystem::path& path, const CsvOptions& csv, int threads) {
  ScanOptions scan;
  scan.csv = csv;
  scan.threads = threads;
  return ScanData(path, scan);
}

}  // namespace

PassResult RunFactorPass(const std::filesystem::path& path, const Design& design, const PassOptions& options) {
  ValidatePassOptions(options);
  const ScanResult scan = ScanForPass(path, options.csv, options.threads);
  return RunFactorPass(*scan.spill, design, options);
}

void ForEachUsedRowInRanges(const Spill& spill, const Design& design, const std::function<void(const UsedRow&)>& visit,
                            const std::optional<HoldoutSettings>& holdout, RowSet set, std::size_t first_range,
                            std::size_t last_range) {
  if (first_range > last_range || last_range > spill.ranges().size()) {
    throw std::invalid_argument("ForEachUsedRowInRanges: ranges out of the spill (a bug)");
  }
  std::uint64_t first_chunk = 0;
  for (std::size_t r = 0; r < first_range; ++r) first_chunk += spill.ranges()[r].chunks.size();
  std::uint64_t last_chunk = first_chunk;
  for (std::size_t r = first_range; r < last_range; ++r) last_chunk += spill.ranges()[r].chunks.size();
  if (first_chunk == last_chunk) return;
  design.CheckHeader(spill.source().header, spill.source().display_name);
  const LevelTables tables = MakeLevelTables(spill, design);
  UsedRow row;
  RowAccounting accounting;
  ForEachRow(spill, design, tables, first_chunk, last_chunk, true,
             [&](const SpillCells& cells, const RowOutcome& outcome, std::span<const double> x, double y, double w,
                 std::span<const double> x_low) {
               const std::uint64_t record = cells.RowIndex();
               if (!CountAndSelect(accounting, outcome, record, holdout, set)) return;
               row.row_index = record;
               row.line = cells.Line();
               row.file = cells.File();
               row.x = x;
               row.x_low = x_low;
               row.y = y;
               row.weight = w;
               visit(row);
             },
             "replay");
}

void ForEachUsedRow(const Spill& spill, const Design& design, const std::function<void(const UsedRow&)>& visit,
                    const std::optional<HoldoutSettings>& holdout, RowSet set) {
  ForEachUsedRowInRanges(spill, design, visit, holdout, set, 0, spill.ranges().size());
}

RowReplay SpillRowReplay(std::shared_ptr<const Spill> spill, const Design& design,
                         std::optional<HoldoutSettings> holdout, RowSet set) {
  return [spill = std::move(spill), design, holdout, set](const std::function<void(const UsedRow&)>& visit) {
    ForEachUsedRow(*spill, design, visit, holdout, set);
  };
}

std::vector<Factor> BuildFoldFactors(const Spill& spill, const Design& design, std::span<const std::size_t> columns,
                                     const FoldSettings& folds, const std::optional<HoldoutSettings>& holdout,
                                     std::size_t block_rows) {
  lapack::UseOneBlasThread();
  const std::vector<double> design_scales = design.scales();
  std::vector<double> scales;
  scales.reserve(columns.size() + 1);
  for (std::size_t column : columns) scales.push_back(design_scales.at(column));
  scales.push_back(design_scales.back());
  std::vector<FactorBuilder> builders;
  builders.reserve(folds.k);
  for (std::size_t f = 0; f < folds.k; ++f) builders.emplace_back(scales, block_rows);
  std::vector<double> x(columns.size());
  ForEachUsedRow(
      spill, design,
      [&](const UsedRow& row) {
        for (std::size_t j = 0; j < columns.size(); ++j) x[j] = row.x[columns[j]];
        builders[FoldOfRecord(folds.seed, row.row_index, folds.k)].AddRow(x, row.y, row.weight);
      },
      holdout, RowSet::kModelRows);
  std::vector<Factor> factors;
  factors.reserve(folds.k);
  for (FactorBuilder& builder : builders) factors.push_back(builder.Finish());
  return factors;
}

void ForEachUsedRow(const std::filesystem::path& path, const Design& design, const CsvOptions& csv,
                    const std::function<void(const UsedRow&)>& visit) {
  const ScanResult scan = ScanForPass(path, csv, 1);
  ForEachUsedRow(*scan.spill, design, visit);
}

RowReplay FileRowReplay(const std::filesystem::path& path, const Design& design, const CsvOptions& csv) {
  return SpillRowReplay(ScanForPass(path, csv, 1).spill, design);
}

}  // namespace stepledger

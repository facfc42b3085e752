#pragma once
// The typed spill: the rows of a data file written once, during the first pass over its text,
// in a binary form that every later pass of the run reads back at memory speed — so that the
// text is parsed exactly once, memory stays flat whatever the rows, and a file replaced or a
// pipe drained while the run goes on cannot mix two inputs into one result.
//
// Layout. One file per byte range of the text (engine/table_scan.h reads ranges in parallel),
// in a private folder under the working folder (--work-dir; default the system temporary
// folder). Each file is a sequence of chunks of up to SpillChunkRowsFor(columns) rows:
//
//   u64 magic "SLSPILL1" | u64 rows | u64 columns | u64 payload bytes
//   u64 line[rows]        line on which each record starts, counted from the range's start
//   u64 offset[rows]      byte offset of each record in the (decoded) text
//   u64 has_codes[columns] 1 when the chunk stores level codes for the column
//   f64 value[columns][rows]   the cell as a number; missing and text cells are quiet NaNs
//                              with the payloads kMissingBits and kTextBits (cells that are
//                              numbers are finite: the first pass refuses non-finite ones)
//   u32 code[columns with codes][rows], padded to 8 bytes: the cell's level, a code into the
//                              range's level list (SpillRange::levels), kNoCode when missing
//
// Level codes are kept per range while the column has at most ProfileOptions::max_levels
// distinct texts in that range; a column that can be a categorical term has at most that many
// in the whole file, so every chunk of every range holds its codes. Chunks are read with plain
// buffered reads (no memory map held resident). The folder and its files are removed when the
// Spill is destroyed, when the first pass fails, and — through RemoveSpillFilesNow, which a
// signal handler may call — on SIGINT and SIGTERM.

#include <sys/types.h>

#include <cstdint>
#include <filesystem>
#include <memory>
#include <mutex>
#include <span>
#include <string>
#include <vector>

namespace stepledger {

inline constexpr std::uint64_t kSpillMissingBits = 0x7FF8000000000001ULL;
inline constexpr std::uint64_t kSpillTextBits = 0x7FF8000000000002ULL;
inline constexpr std::uint32_t kSpillNoCode = 0xFFFFFFFFU;
/// Rows per chunk: large enough that a chunk's header costs nothing, small enough that a chunk
/// of 100 columns is a few MB.
inline constexpr std::size_t kSpillChunkRows = 4096;
/// Most bytes of cells (8 for the value, 4 for the code) a chunk holds: a wide file gets fewer
/// rows per chunk (SpillChunkRowsFor), so that a writer's and a reader's buffers stay a few tens
/// of MB whatever the columns (10,000 columns: 139 rows per chunk, not 4,096 rows and 490 MB).
inline constexpr std::size_t kSpillChunkCellBytes = std::size_t{16} << 20;
/// Rows per chunk for a file of `columns` columns: kSpillChunkRows, or fewer (at least 1) so that
/// columns x rows x 12 bytes stay within kSpillChunkCellBytes.
inline constexpr std::size_t SpillChunkRowsFor(std::size_t columns) {
  const std::size_t by_bytes = kSpillChunkCellBytes / (12 * (columns == 0 ? 1 : columns));
  return by_bytes < 1 ? 1 : (by_bytes < kSpillChunkRows ? by_bytes : kSpillChunkRows);
}

/// Where a chunk starts in its range file and how many rows it holds.
struct SpillChunkEntry {
  std::uint64_t file_offset = 0;
  std::uint64_t rows = 0;
};

/// One range's rows on disk and what reading them back needs.
struct SpillRange {
  std::filesystem::path file;
  std::uint64_t rows = 0;
  std::uint64_t rows_before = 0;   ///< data records in the ranges before this one
  std::uint64_t lines_before = 0;  ///< line ends of its file before this range's first record
  /// The data file the range was read from: an index into Spill::sources() (0 for a single file;
  /// a data set of several files has ranges of each file in file order).
  std::size_t source = 0;
  /// Per column: the texts of the range's level codes (code i is levels[column][i]); empty for
  /// a column whose codes were not kept.
  std::vector<std::vector<std::string>> levels;
  /// The chunks in file order (one entry per SpillChunkRowsFor(columns) rows, 4096 up to 341
  /// columns: bounded by the rows / that).
  std::vector<SpillChunkEntry> chunks;
};

/// What the spill knows of the text it came from, to quote a cell's exact text and byte column
/// in a message from a later pass (by reading that one record again, when the file is a plain
/// regular file that has not changed since; otherwise the message gives the line only).
struct SpillSource {
  std::filesystem::path path;
  std::string display_name;
  bool rereadable = false;  ///< a plain (uncompressed) regular file
  dev_t device = 0;
  ino_t inode = 0;
  std::uint64_t size = 0;
  std::int64_t modified_ns = 0;
  std::vector<std::string> header;
  char delimiter = ',';
};

/// A private folder for spill files; removed with everything in it on destruction. Throws
/// InputError naming the working folder when it cannot be created.
class SpillFolder {
 public:
  explicit SpillFolder(const std::filesystem::path& work_dir);
  ~SpillFolder();
  SpillFolder(const SpillFolder&) = delete;
  SpillFolder& operator=(const SpillFolder&) = delete;
  const std::filesystem::path& path() const { return path_; }
  const std::filesystem::path& work_dir() const { return work_dir_; }
  /// A new file name in the folder (registered for removal on a signal). Thread-safe.
  std::filesystem::path NewFile(const std::string& name);

 private:
  std::mutex mutex_;
  std::filesystem::path work_dir_;
  std::filesystem::path path_;
  std::vector<std::filesystem::path> files_;
  int registry_slot_ = -1;
};

/// Removes every spill file and folder of the process. Async-signal-safe (unlink and rmdir on
/// paths prepared in advance), for handlers of SIGINT and SIGTERM; also safe to call twice.
void RemoveSpillFilesNow() noexcept;

/// The rows of one data file, or of the files of a data set in order (engine/data_set.h),
/// written by the first pass (engine/table_scan.h).
class Spill {
 public:
  Spill(std::unique_ptr<SpillFolder> folder, std::vector<SpillRange> ranges, std::size_t columns,
        SpillSource source);
  /// A data set: one source per file, in reading order (every SpillRange::source indexes it);
  /// at least one, all with the same header.
  Spill(std::unique_ptr<SpillFolder> folder, std::vector<SpillRange> ranges, std::size_t columns,
        std::vector<SpillSource> sources);
  const std::vector<SpillRange>& ranges() const { return ranges_; }
  std::size_t column_count() const { return columns_; }
  std::uint64_t rows() const;
  std::uint64_t chunk_count() const;
  /// The first file (its header is every file's header).
  const SpillSource& source() const { return sources_.front(); }
  /// The file range `range` was read from (for a message naming the file and its line).
  const SpillSource& source_of_range(std::size_t range) const { return sources_.at(ranges_.at(range).source); }
  const std::vector<SpillSource>& sources() const { return sources_; }
  const std::filesystem::path& folder() const { return folder_->path(); }
  /// Bytes on disk.
  std::uint64_t bytes() const;

 private:
  std::unique_ptr<SpillFolder> folder_;
  std::vector<SpillRange> ranges_;
  std::size_t columns_ = 0;
  std::vector<SpillSource> sources_;
};

/// Writes one range's chunks. Throws InputError naming the folder and the room needed when the
/// disk is full or the folder unwritable; estimated_total_rows (0: unknown) sizes that figure.
class SpillWriter {
 public:
  SpillWriter(std::filesystem::path file, std::filesystem::path work_dir, std::size_t columns);
  ~SpillWriter();
  SpillWriter(const SpillWriter&) = delete;
  SpillWriter& operator=(const SpillWriter&) = delete;

  /// Starts a row; then Set each column once.
  void BeginRow(std::uint64_t line, std::uint64_t offset);
  void Set(std::size_t column, std::uint64_t value_bits, std::uint32_t code) {
    values_[column * chunk_rows_ + rows_in_chunk_] = value_bits;
    codes_[column * chunk_rows_ + rows_in_chunk_] = code;
    if (code != kSpillNoCode) has_codes_[column] = 1;
  }
  void EndRow();
  /// Writes the last chunk and closes the file; returns the chunk list.
  std::vector<SpillChunkEntry> Finish();
  std::uint64_t rows() const { return rows_; }
  /// The bytes the spill would need for total_rows rows of this width (for messages).
  std::uint64_t BytesFor(std::uint64_t total_rows) const;
  /// Set when the writer can estimate the file's total rows (from its size).
  void SetEstimatedTotalRows(std::uint64_t rows) { estimated_total_rows_ = rows; }

 private:
  void FlushChunk();
  void WriteAll(const void* data, std::size_t bytes);

  std::filesystem::path file_;
  std::filesystem::path work_dir_;
  std::size_t columns_ = 0;
  std::size_t chunk_rows_ = kSpillChunkRows;  // SpillChunkRowsFor(columns_)
  int fd_ = -1;
  std::uint64_t rows_ = 0;
  std::uint64_t written_ = 0;
  std::uint64_t estimated_total_rows_ = 0;
  std::size_t rows_in_chunk_ = 0;
  std::vector<std::uint64_t> lines_, offsets_, values_;
  std::vector<std::uint32_t> codes_;
  std::vector<std::uint64_t> has_codes_;
  std::vector<SpillChunkEntry> chunks_;
  std::vector<char> out_;
};

/// One chunk read back: views valid until the next SpillReader::Next.
struct SpillChunk {
  std::size_t rows = 0;
  std::size_t range = 0;            ///< index of the range it belongs to
  std::uint64_t first_row = 0;      ///< range-local index of its first row
  const std::uint64_t* lines = nullptr;
  const std::uint64_t* offsets = nullptr;
  std::size_t columns = 0;
  const std::uint64_t* has_codes = nullptr;
  const double* values_base = nullptr;
  std::vector<const std::uint32_t*> codes;  ///< per column; nullptr when not stored

  const double* values(std::size_t column) const { return values_base + column * rows; }
};

/// Reads chunks [first, last) of the spill in order (chunks are numbered across ranges).
class SpillReader {
 public:
  SpillReader(const Spill& spill, std::uint64_t first_chunk, std::uint64_t last_chunk);
  SpillReader(const Spill& spill) : SpillReader(spill, 0, spill.chunk_count()) {}
  ~SpillReader();
  SpillReader(const SpillReader&) = delete;
  SpillReader& operator=(const SpillReader&) = delete;
  bool Next(SpillChunk& chunk);

 private:
  const Spill& spill_;
  std::uint64_t next_ = 0;
  std::uint64_t last_ = 0;
  std::size_t range_ = 0;
  std::size_t chunk_in_range_ = 0;
  std::uint64_t row_in_range_ = 0;
  int fd_ = -1;
  std::size_t open_range_ = static_cast<std::size_t>(-1);
  std::vector<std::uint64_t> buffer_;
};

/// The cell value bits of a double (what the spill stores).
inline std::uint64_t SpillBits(double value) {
  std::uint64_t bits;
  static_assert(sizeof bits == sizeof value);
  __builtin_memcpy(&bits, &value, sizeof bits);
  return bits;
}
inline bool IsSpillMissing(double value) { return SpillBits(value) == kSpillMissingBits; }
inline bool IsSpillText(double value) { return SpillBits(value) == kSpillTextBits; }

}  // namespace stepledger

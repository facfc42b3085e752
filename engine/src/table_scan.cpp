#include "stepledger/engine/table_scan.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstring>
#include <exception>
#include <limits>
#include <optional>
#include <unordered_map>

#include "file_identity.h"
#include "thread_start.h"
#include "stepledger/engine/byte_source.h"
#include "stepledger/engine/column_source.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/utf8.h"
#include "stepledger/engine/fingerprint.h"

namespace stepledger {
namespace {

constexpr double kUndefined = std::numeric_limits<double>::quiet_NaN();

// Hashes std::string and std::string_view alike, so that counting a cell needs no allocation
// unless its text is a new level.
struct TextHash {
  using is_transparent = void;
  std::size_t operator()(std::string_view text) const noexcept {
    return std::hash<std::string_view>{}(text);
  }
};

struct LevelEntry {
  std::uint32_t code = 0;
  std::uint64_t count = 0;
};

// One column's state in one range.
struct ColumnTally {
  std::uint64_t present = 0;
  std::uint64_t missing = 0;
  std::uint64_t numeric_cells = 0;
  // Welford's running mean and sum of squared deviations (Welford 1962, Technometrics 4(3));
  // ranges merge with the pairwise formula of Chan, Golub and LeVeque (1979).
  double mean = 0;
  double squared_deviations = 0;
  double min = std::numeric_limits<double>::infinity();
  double max = -std::numeric_limits<double>::infinity();
  // Where min and max are: their first cell in file order (line, column, and the file of a data
  // set: an index into the set's files, 0 within one file's ranges).
  std::uint64_t min_line = 0, min_column = 0, max_line = 0, max_column = 0;
  std::size_t min_file = 0, max_file = 0, first_text_file = 0;
  bool levels_overflowed = false;
  std::unordered_map<std::string, LevelEntry, TextHash, std::equal_to<>> levels;
  std::vector<std::string> level_texts;  // by code
  std::optional<CellLocation> first_text;
};

// What one reader made of its range.
struct RangeScan {
  std::vector<ColumnTally> tallies;
  std::uint64_t rows = 0;
  std::uint64_t line_ends = 0;  // line ends consumed from the range's start
  std::uint64_t stop = 0;       // where the first record after the range starts
  std::filesystem::path spill_file;
  std::vector<SpillChunkEntry> chunks;
  std::exception_ptr error;
};

class Descriptor {
 public:
  explicit Descriptor(const std::filesystem::path& path) {
    fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) {
      throw InputError("cannot open data file '" + path.string() + "': " + std::strerror(errno));
    }
  }
  ~Descriptor() { ::close(fd_); }
  Descriptor(const Descriptor&) = delete;
  Descriptor& operator=(const Descriptor&) = delete;
  int get() const { return fd_; }

 private:
  int fd_ = -1;
};

std::size_t PreadSome(int fd, char* buffer, std::size_t capacity, std::uint64_t offset, const std::string& name) {
  for (;;) {
    const ssize_t got = ::pread(fd, buffer, capacity, static_cast<off_t>(offset));
    if (got >= 0) return static_cast<std::size_t>(got);
    if (errno != EINTR) throw InputError("cannot read data file '" + name + "': " + std::strerror(errno));
  }
}

// Text the scan keeps (a level, the first text of a column) ends up in JSON (the audit, --json),
// which holds Unicode only: text that is not UTF-8 is refused where it is read.
[[noreturn]] void FailNotUtf8(const CsvReader& reader, const CsvField& field, std::size_t column) {
  reader.Fail(field.line, field.column,
              "column '" + QuoteForMessage(reader.header()[column]) + "' holds text that is not UTF-8 (" +
                  DescribeInvalidUtf8(field.text) +
                  " of the cell); stepledger reads data files as UTF-8: convert the file first (for example "
                  "from Latin-1)");
}

// Every text cell is checked, kept or not: checking only the texts a tally keeps (its first text,
// a new level below the levels limit) would make the outcome depend on where the file is cut, as
// each range's tally keeps its own. A level never holds a NUL byte.
void CheckText(const CsvReader& reader, const CsvField& field, std::size_t column) {
  if (FirstInvalidUtf8(field.text)) FailNotUtf8(reader, field, column);
  if (const auto nul = FirstNulByte(field.text)) {
    reader.Fail(field.line, field.column,
                "column '" + QuoteForMessage(reader.header()[column]) + "' holds a NUL byte (0x00) at byte " +
                    std::to_string(*nul + 1) + " of the cell" + std::string(kNulByteAdvice));
  }
}

// Marks a column past the levels limit and frees the levels it kept.
void DropLevels(ColumnTally& tally) {
  tally.levels_overflowed = true;
  decltype(tally.levels)().swap(tally.levels);
  std::vector<std::string>().swap(tally.level_texts);
}

// Counts one cell into the tally and returns what the spill stores for it.
inline void TallyCell(const CsvReader& reader, const CsvField& field, std::size_t column,
                      const std::vector<std::string>& missing_tokens, std::size_t max_levels,
                      ColumnTally& tally, std::uint64_t& bits, std::uint32_t& code) {
  double value = 0;
  code = kSpillNoCode;
  switch (ClassifyCell(field.text, missing_tokens, value)) {
    case CellKind::kMissing:
      ++tally.missing;
      bits = kSpillMissingBits;
      return;
    case CellKind::kNonFinite:
      reader.Fail(field.line, field.column,
                  "column '" + QuoteForMessage(reader.header()[column]) + "' holds '" +
                      QuoteForMessage(field.text) + "', which is not a finite number");
    case CellKind::kNumber: {
      ++tally.numeric_cells;
      const double delta = value - tally.mean;
      tally.mean += delta / static_cast<double>(tally.numeric_cells);
      tally.squared_deviations += delta * (value - tally.mean);
      if (value < tally.min) {
        tally.min = value;
        tally.min_line = field.line;
        tally.min_column = field.column;
      }
      if (value > tally.max) {
        tally.max = value;
        tally.max_line = field.line;
        tally.max_column = field.column;
      }
      bits = SpillBits(value);
      break;
    }
    case CellKind::kText:
      CheckText(reader, field, column);
      if (!tally.first_text) {
        tally.first_text = CellLocation{field.line, field.column, std::string(field.text), std::string()};
      }
      bits = kSpillTextBits;
      break;
  }
  ++tally.present;
  if (tally.levels_overflowed) return;
  const auto found = tally.levels.find(field.text);
  if (found != tally.levels.end()) {
    ++found->second.count;
    code = found->second.code;
  } else if (tally.levels.size() < max_levels) {
    code = static_cast<std::uint32_t>(tally.level_texts.size());
    tally.levels.emplace(std::string(field.text), LevelEntry{code, 1});
    tally.level_texts.emplace_back(field.text);
  } else {
    // Once past the limit the column cannot be a categorical term; stop paying for it, and give
    // back what it held (a wide file of numeric columns would otherwise keep columns x limit
    // texts it never uses).
    DropLevels(tally);
  }
}

// Reads every record of the reader's range (or file) into the tallies and the spill writer.
// total_bytes (0: unknown) lets the writer estimate the room it needs for a message.
void ScanRecords(CsvReader& reader, const ScanOptions& options, SpillWriter* writer,
                 std::uint64_t first_byte, std::uint64_t total_bytes, RangeScan& out) {
  const std::size_t columns = reader.header().size();
  out.tallies.assign(columns, ColumnTally{});
  const std::vector<std::string>& missing_tokens = options.csv.missing_tokens;
  const std::size_t max_levels = options.profile.max_levels;
  CsvRecord record;
  while (reader.Next(record)) {
    ++out.rows;
    if (writer != nullptr) writer->BeginRow(record.line, record.offset);
    for (std::size_t c = 0; c < columns; ++c) {
      std::uint64_t bits = 0;
      std::uint32_t code = kSpillNoCode;
      TallyCell(reader, record.fields[c], c, missing_tokens, max_levels, out.tallies[c], bits, code);
      if (writer != nullptr) writer->Set(c, bits, code);
    }
    if (writer != nullptr) {
      writer->EndRow();
      if (total_bytes > 0 && out.rows % kSpillChunkRows == 0) {
        const std::uint64_t done = std::max<std::uint64_t>(reader.bytes_read() - first_byte, 1);
        writer->SetEstimatedTotalRows(out.rows * (total_bytes / done + 1));
      }
    }
  }
  out.line_ends = reader.line_ends_read();
  out.stop = reader.bytes_read();
  if (writer != nullptr) out.chunks = writer->Finish();
}

// Folds a range's tally into the running one; the range is of file `file_index` of the set, after
// lines_before line ends of that file.
void MergeTally(ColumnTally& into, ColumnTally&& from, std::uint64_t lines_before, std::size_t file_index,
                std::size_t max_levels) {
  if (from.numeric_cells > 0) {
    if (into.numeric_cells == 0) {
      into.mean = from.mean;
      into.squared_deviations = from.squared_deviations;
    } else {
      const double na = static_cast<double>(into.numeric_cells);
      const double nb = static_cast<double>(from.numeric_cells);
      const double n = na + nb;
      const double delta = from.mean - into.mean;
      into.mean += delta * (nb / n);
      into.squared_deviations += from.squared_deviations + delta * delta * (na * nb / n);
    }
    // Strictly smaller or larger only: on a tie the earlier range's cell stays (first in file order).
    if (from.min < into.min) {
      into.min = from.min;
      into.min_line = from.min_line + lines_before;
      into.min_column = from.min_column;
      into.min_file = file_index;
    }
    if (from.max > into.max) {
      into.max = from.max;
      into.max_line = from.max_line + lines_before;
      into.max_column = from.max_column;
      into.max_file = file_index;
    }
  }
  into.present += from.present;
  into.missing += from.missing;
  into.numeric_cells += from.numeric_cells;
  if (!into.first_text && from.first_text) {
    into.first_text = std::move(from.first_text);
    into.first_text->line += lines_before;
    into.first_text_file = file_index;
  }
  if (from.levels_overflowed && !into.levels_overflowed) DropLevels(into);
  if (into.levels_overflowed) return;
  for (auto& [text, entry] : from.levels) {
    const auto found = into.levels.find(text);
    if (found != into.levels.end()) {
      found->second.count += entry.count;
    } else if (into.levels.size() < max_levels) {
      into.levels.emplace(text, entry);
    } else {
      DropLevels(into);
      return;
    }
  }
}

// The shortest text that reads back as the same double.
std::string ShortestText(double value) {
  char text[32];
  const auto written = std::to_chars(text, text + sizeof text, value);
  return std::string(text, static_cast<std::size_t>(written.ptr - text));
}

// file_names: the display names of the set's files (locations name the file they lie in).
ColumnProfile FinishColumn(const std::string& name, std::size_t index, ColumnTally& tally,
                           std::size_t max_levels, const std::vector<std::string>& file_names) {
  ColumnProfile column;
  column.level_limit = max_levels;
  column.name = name;
  column.index = index;
  column.present = tally.present;
  column.missing = tally.missing;
  column.numeric_cells = tally.numeric_cells;
  if (tally.first_text) {
    column.kind = ColumnKind::kCategorical;
  } else if (tally.numeric_cells > 0) {
    column.kind = ColumnKind::kNumeric;
  } else {
    column.kind = ColumnKind::kEmpty;
  }
  if (column.kind == ColumnKind::kNumeric) {
    // Degenerate case: one present cell has no sample standard deviation (n-1 = 0).
    const double n = static_cast<double>(tally.numeric_cells);
    column.min = tally.min;
    column.max = tally.max;
    column.min_at = CellLocation{tally.min_line, tally.min_column, ShortestText(tally.min), file_names.at(tally.min_file)};
    column.max_at = CellLocation{tally.max_line, tally.max_column, ShortestText(tally.max), file_names.at(tally.max_file)};
    column.mean = tally.mean;
    column.sd = tally.numeric_cells > 1 ? std::sqrt(tally.squared_deviations / (n - 1)) : kUndefined;
  } else {
    column.min = column.max = column.mean = column.sd = kUndefined;
  }
  // A column past the level limit keeps no levels: which ones a partial list would hold would
  // depend on how the file was cut into ranges.
  if (!tally.levels_overflowed && column.kind != ColumnKind::kEmpty) {
    column.levels.reserve(tally.levels.size());
    for (auto& [level, entry] : tally.levels) column.levels.push_back(LevelCount{level, entry.count});
    // std::string compares with char_traits<char>, i.e. memcmp: byte-wise, unsigned.
    std::sort(column.levels.begin(), column.levels.end(),
              [](const LevelCount& a, const LevelCount& b) { return a.level < b.level; });
  }
  column.too_many_levels = column.kind == ColumnKind::kCategorical && tally.levels_overflowed;
  column.first_text = std::move(tally.first_text);
  if (column.first_text) column.first_text->file = file_names.at(tally.first_text_file);
  return column;
}

bool StartsCompressed(const char* bytes, std::size_t size) {
  return (size >= 2 && static_cast<unsigned char>(bytes[0]) == 0x1F && static_cast<unsigned char>(bytes[1]) == 0x8B) ||
         (size >= 4 && static_cast<unsigned char>(bytes[0]) == 0x28 && static_cast<unsigned char>(bytes[1]) == 0xB5 &&
          static_cast<unsigned char>(bytes[2]) == 0x2F && static_cast<unsigned char>(bytes[3]) == 0xFD);
}

// The offset just after the first LF at or after `from` (size when there is none).
std::uint64_t NextLineStart(int fd, std::uint64_t from, std::uint64_t size, const std::string& name) {
  std::vector<char> buffer(1 << 16);
  for (std::uint64_t at = from; at < size;) {
    const std::size_t got = PreadSome(fd, buffer.data(), buffer.size(), at, name);
    if (got == 0) break;
    const void* lf = std::memchr(buffer.data(), '\n', got);
    if (lf != nullptr) return at + static_cast<std::uint64_t>(static_cast<const char*>(lf) - buffer.data()) + 1;
    at += got;
  }
  return size;
}

// Hashes the fingerprint blocks [first, last) of the file.
void HashBlocks(int fd, std::uint64_t size, std::size_t first, std::size_t last,
                std::vector<Sha256Digest>& digests, const std::string& name) {
  std::vector<char> buffer(DataFingerprint::kBlockBytes);
  for (std::size_t block = first; block < last; ++block) {
    const std::uint64_t begin = static_cast<std::uint64_t>(block) * DataFingerprint::kBlockBytes;
    const std::size_t length = static_cast<std::size_t>(std::min<std::uint64_t>(DataFingerprint::kBlockBytes, size - begin));
    std::size_t done = 0;
    while (done < length) {
      const std::size_t got = PreadSome(fd, buffer.data() + done, length - done, begin + done, name);
      if (got == 0) throw InputError("data file '" + name + "' became shorter while it was read");
      done += got;
    }
    digests[block] = Sha256(std::string_view(buffer.data(), length));
  }
}

SpillSource MakeSource(const std::filesystem::path& path, const FileIdentity& identity, bool plain,
                       const std::vector<std::string>& header, const CsvOptions& csv) {
  SpillSource source;
  source.path = path;
  source.display_name = path.string();
  source.rereadable = plain && identity.regular;
  source.device = identity.device;
  source.inode = identity.inode;
  source.size = identity.size;
  source.modified_ns = identity.modified_ns;
  source.header = header;
  source.delimiter = csv.delimiter;
  return source;
}

void CheckUnchanged(int fd, const FileIdentity& before, const std::string& name) {
  if (!before.regular) return;
  if (!(IdentityOf(fd, name) == before)) {
    throw InputError("data file '" + name + "' changed while it was read (its size or time of last "
                     "change moved); run again once it is complete");
  }
}

// One range of the scan as the spill keeps it (its chunks and level texts moved out of the scan):
// its rows come after rows_before records of the set, its lines after lines_before line ends of
// its file; source is the file's index in the set.
SpillRange SpillRangeOf(RangeScan& scan, std::uint64_t rows_before, std::uint64_t lines_before, std::size_t source) {
  SpillRange range;
  range.file = scan.spill_file;
  range.rows = scan.rows;
  range.rows_before = rows_before;
  range.lines_before = lines_before;
  range.source = source;
  range.chunks = std::move(scan.chunks);
  range.levels.resize(scan.tallies.size());
  for (std::size_t c = 0; c < scan.tallies.size(); ++c) {
    if (!scan.tallies[c].levels_overflowed) range.levels[c] = std::move(scan.tallies[c].level_texts);
  }
  return range;
}

// The spill ranges of one file of the set (SpillRangeOf, in file order).
void AppendSpillRanges(std::vector<RangeScan>& scans, const std::vector<std::uint64_t>& lines_before,
                       std::uint64_t rows_before, std::size_t source, std::vector<SpillRange>& ranges) {
  for (std::size_t r = 0; r < scans.size(); ++r) {
    ranges.push_back(SpillRangeOf(scans[r], rows_before, lines_before[r], source));
    rows_before += scans[r].rows;
  }
}

// The scan's spill folder, made once the first file is open and its header read (never before:
// a spill folder that appears tells whoever watches the working folder that the data file has
// been opened), shared by every file of a set.
class LazySpillFolder {
 public:
  LazySpillFolder(bool wanted, std::filesystem::path work_dir) : wanted_(wanted), work_dir_(std::move(work_dir)) {}
  /// The folder (made on first call), or null when no spill is wanted.
  SpillFolder* Get() {
    if (wanted_ && !folder_) folder_ = std::make_unique<SpillFolder>(work_dir_);
    return folder_.get();
  }
  std::unique_ptr<SpillFolder> Release() { return std::move(folder_); }

 private:
  bool wanted_ = false;
  std::filesystem::path work_dir_;
  std::unique_ptr<SpillFolder> folder_;
};

// The first file's header, which every later file of a set must repeat.
struct ExpectedHeader {
  const std::vector<std::string>* names = nullptr;  // null for the first file
  std::string file;                                 // the first file's name
};

// What a scan of a data set gathers file by file, and the ScanResult made of it once every file
// is read: shared by the scan in one process (ScanData) and the scan shared by processes.
struct SetScan {
  ScanResult result;
  std::vector<std::string> file_names;  // as the profile names them, in reading order
  std::vector<ColumnTally> merged;      // the running tallies of every column
  std::vector<SpillRange> spill_ranges;
  std::vector<SpillSource> sources;
  std::vector<std::string> fingerprints;
  std::uint64_t rows_before = 0;  // records of the files added so far

  SetScan() { result.ranges = 0; }

  // File `index` of the set is about to be read at `path`: what its header must equal (the first
  // file's) and the prefix of its spill files (the first file keeps the names a single file
  // always had).
  std::pair<ExpectedHeader, std::string> BeginFile(const std::filesystem::path& path, std::size_t index) {
    file_names.push_back(path.string());
    return {ExpectedHeader{index == 0 ? nullptr : &result.header, file_names.front()},
            index == 0 ? std::string() : "file-" + std::to_string(index) + "-"};
  }

  // The first file's header names the set's columns.
  void TakeHeader(std::size_t index, const std::vector<std::string>& header) {
    if (index != 0) return;
    result.header = header;
    merged.resize(result.header.size());
  }

  // One range's tallies join the running ones at once, so that what the scan keeps grows with the
  // columns and levels, not with the files.
  void MergeRange(std::vector<ColumnTally>& tallies, std::uint64_t lines_before, std::size_t index,
                  std::size_t max_levels) {
    for (std::size_t c = 0; c < merged.size() && c < tallies.size(); ++c) {
      MergeTally(merged[c], std::move(tallies[c]), lines_before, index, max_levels);
    }
  }

  void AddFile(const std::filesystem::path& path, std::uint64_t stored_bytes, const std::string& sha256,
               const std::string& encoding, std::uint64_t rows, std::size_t ranges) {
    rows_before += rows;
    result.ranges += static_cast<int>(ranges);
    result.stored_bytes += stored_bytes;
    fingerprints.push_back(sha256);
    result.files.push_back(ScannedFile{path, stored_bytes, sha256, encoding, rows});
  }

  ScanResult Finish(const DataSet& data, const ScanOptions& options, LazySpillFolder& spill) {
    result.sha256 = CombineMemberFingerprints(fingerprints);
    result.encoding = result.files.front().encoding;
    for (const ScannedFile& file : result.files) {
      if (file.encoding != result.encoding) result.encoding = "mixed";
    }
    result.profile.path = DescribeDataSet(data);
    result.profile.rows = rows_before;
    result.profile.columns.reserve(result.header.size());
    for (std::size_t c = 0; c < result.header.size(); ++c) {
      result.profile.columns.push_back(
          FinishColumn(result.header[c], c, merged[c], options.profile.max_levels, file_names));
    }
    if (options.spill) {
      result.spill = std::make_shared<Spill>(spill.Release(), std::move(spill_ranges), result.header.size(),
                                             std::move(sources));
    }
    return std::move(result);
  }
};

// What the scan of one file gives before it joins the set's profile and spill.
struct FileScan {
  std::vector<std::string> header;
  std::vector<RangeScan> ranges;
  std::vector<std::uint64_t> lines_before;  // per range: the file's line ends before it
  std::string sha256;
  std::uint64_t stored_bytes = 0;
  std::string encoding = "plain";
  bool plain = true;
};

// Refuses a file of a set whose header is not the first file's, naming both files and the first
// column that differs (before any record of the file is read).
void CheckSameHeader(const ExpectedHeader& expected, const std::vector<std::string>& header, const std::string& name) {
  if (expected.names == nullptr) return;
  const std::vector<std::string>& first = *expected.names;
  if (header == first) return;
  std::size_t column = 0;
  while (column < first.size() && column < header.size() && first[column] == header[column]) ++column;
  std::string detail;
  if (column < first.size() && column < header.size()) {
    detail = "column " + std::to_string(column + 1) + " is '" + QuoteForMessage(header[column]) + "' here and '" +
             QuoteForMessage(first[column]) + "' in '" + expected.file + "'";
  } else if (column < first.size()) {
    detail = "column " + std::to_string(column + 1) + " ('" + QuoteForMessage(first[column]) + "' in '" + expected.file +
             "') is missing here (" + std::to_string(header.size()) + " columns, '" + expected.file + "' has " +
             std::to_string(first.size()) + ")";
  } else {
    detail = "column " + std::to_string(column + 1) + " ('" + QuoteForMessage(header[column]) + "') is extra here (" +
             std::to_string(header.size()) + " columns, '" + expected.file + "' has " + std::to_string(first.size()) + ")";
  }
  throw InputError(FormatLocation(name, 1, 0) + ": the header differs from the header of '" + expected.file + "': " +
                   detail + "; every file of a data set must have the same header");
}

// One reader over the whole stream: pipes, FIFOs, compressed files, one thread, small files.
FileScan ScanWhole(const std::filesystem::path& path, Descriptor& file, const FileIdentity& identity,
                   const ScanOptions& options, LazySpillFolder& spill, const std::string& spill_prefix,
                   const ExpectedHeader& expected) {
  FileScan result;
  DataFingerprint fingerprint;
  const int fd = file.get();
  const std::string name = path.string();
  // A ByteSource reads gzip and zstd files as their text; the fingerprint is over the bytes as
  // stored.
  ByteSource source(fd, path);
  source.SetStoredByteObserver([&fingerprint](std::string_view bytes) { fingerprint.Update(bytes); });
  CsvReader reader(path, [&source](char* buffer, std::size_t capacity) { return source.Read(buffer, capacity); },
                   options.csv);
  result.header = reader.header();
  CheckSameHeader(expected, result.header, name);
  SpillFolder* folder = spill.Get();

  std::unique_ptr<SpillWriter> writer;
  result.ranges.resize(1);
  if (folder != nullptr) {
    result.ranges[0].spill_file = folder->NewFile(spill_prefix + "range-0.bin");
    writer = std::make_unique<SpillWriter>(result.ranges[0].spill_file, folder->work_dir(), result.header.size());
  }
  ScanRecords(reader, options, writer.get(), 0, identity.regular ? identity.size : 0, result.ranges[0]);
  CheckUnchanged(fd, identity, name);
  result.stored_bytes = fingerprint.total_bytes();
  result.sha256 = fingerprint.Finish();
  result.encoding = std::string(source.encoding());
  result.plain = source.encoding_kind() == ByteEncoding::kPlain;
  result.lines_before = {0};  // a whole-file reader counts from line 1
  return result;
}

// The header of a file read with positioned reads from its start: the names, the bytes it takes
// and the line ends in it (a quoted name may hold one). Shared by the scan in one process and the
// scan shared by processes.
struct HeaderAtStart {
  std::vector<std::string> names;
  std::uint64_t end = 0;
  std::uint64_t lines = 0;
};

HeaderAtStart ReadHeaderAtStart(const std::filesystem::path& path, int fd, const std::string& name,
                                const CsvOptions& csv) {
  std::uint64_t next = 0;
  CsvReader header_reader(path, [&](char* buffer, std::size_t capacity) {
    const std::size_t got = PreadSome(fd, buffer, capacity, next, name);
    next += got;
    return got;
  }, csv);
  return HeaderAtStart{header_reader.header(), header_reader.bytes_read(), header_reader.line_ends_read()};
}

FileScan ScanInRanges(const std::filesystem::path& path, Descriptor& file, const FileIdentity& identity,
                      const ScanOptions& options, LazySpillFolder& spill, const std::string& spill_prefix,
                      const ExpectedHeader& expected) {
  const int fd = file.get();
  const std::string name = path.string();
  const std::uint64_t size = identity.size;
  FileScan result;
  const HeaderAtStart head = ReadHeaderAtStart(path, fd, name, options.csv);
  result.header = head.names;
  const std::uint64_t header_end = head.end, header_lines = head.lines;
  CheckSameHeader(expected, result.header, name);
  SpillFolder* folder = spill.Get();

  // The guessed cuts: after the first line end at or after each even share of the bytes (or at
  // the places the caller chose).
  const std::uint64_t body = size - header_end;
  std::vector<std::uint64_t> cuts = options.range_cuts;
  if (cuts.empty()) {
    const std::uint64_t by_size = std::max<std::uint64_t>(1, body / std::max<std::uint64_t>(1, options.min_range_bytes));
    const std::uint64_t count = std::min<std::uint64_t>(options.threads, by_size);
    for (std::uint64_t r = 1; r < count; ++r) cuts.push_back(header_end + body * r / count);
  }
  std::sort(cuts.begin(), cuts.end());
  const std::size_t range_count = cuts.size() + 1;
  std::vector<std::uint64_t> starts(range_count);
  starts[0] = header_end;
  for (std::size_t r = 1; r < range_count; ++r) {
    const std::uint64_t cut = std::max(cuts[r - 1], header_end);
    starts[r] = std::max(starts[r - 1], cut == 0 ? 0 : NextLineStart(fd, cut - 1, size, name));
  }
  auto end_of = [&](std::size_t r) { return r + 1 < range_count ? starts[r + 1] : UINT64_MAX; };

  std::vector<RangeScan>& scans = result.ranges;
  scans.resize(range_count);
  const std::size_t blocks = static_cast<std::size_t>((size + DataFingerprint::kBlockBytes - 1) / DataFingerprint::kBlockBytes);
  std::vector<Sha256Digest> digests(blocks);
  std::vector<std::exception_ptr> hash_errors(range_count);
  auto scan_range = [&](std::size_t r, std::uint64_t begin, const std::string& file_name) {
    RangeScan& scan = scans[r];
    scan = RangeScan{};
    try {
      std::unique_ptr<SpillWriter> writer;
      if (folder != nullptr) {
        scan.spill_file = folder->NewFile(file_name);
        writer = std::make_unique<SpillWriter>(scan.spill_file, folder->work_dir(), result.header.size());
      }
      CsvReader reader(path, fd, CsvRange{begin, end_of(r), result.header}, options.csv);
      const std::uint64_t range_bytes = end_of(r) == UINT64_MAX ? size - std::min(size, begin)
                                                                : end_of(r) - std::min(end_of(r), begin);
      ScanRecords(reader, options, writer.get(), begin, range_bytes, scan);
    } catch (...) {
      scan.error = std::current_exception();
    }
  };
  detail::RunTasks(
      range_count,
      [&](std::size_t r) {
        try {
          scan_range(r, starts[r], spill_prefix + "range-" + std::to_string(r) + ".bin");
        } catch (...) {
          scans[r].error = std::current_exception();  // the file name could not be made
        }
        try {
          HashBlocks(fd, size, blocks * r / range_count, blocks * (r + 1) / range_count, digests, name);
        } catch (...) {
          hash_errors[r] = std::current_exception();
        }
      },
      "reading the data");
  // Check the guessed cuts in file order; read a range again from the true boundary when the
  // range before ends elsewhere (a quoted field held the guessed line end).
  std::vector<std::uint64_t>& lines_before = result.lines_before;
  lines_before.assign(range_count, 0);
  lines_before[0] = header_lines;
  for (std::size_t r = 0; r < range_count; ++r) {
    if (r > 0) {
      const RangeScan& previous = scans[r - 1];
      lines_before[r] = lines_before[r - 1] + previous.line_ends;
      if (previous.stop != starts[r]) {
        starts[r] = previous.stop;
        scan_range(r, starts[r], spill_prefix + "range-" + std::to_string(r) + "-again.bin");
      }
    }
    if (scans[r].error) {
      try {
        std::rethrow_exception(scans[r].error);
      } catch (const LocatedInputError& error) {
        throw error.WithLinesBefore(lines_before[r]);
      }
    }
  }
  for (const auto& error : hash_errors) {
    if (error) std::rethrow_exception(error);
  }
  CheckUnchanged(fd, identity, name);
  result.stored_bytes = size;
  result.sha256 = DataFingerprint::Combine(digests, size);
  result.plain = true;
  return result;
}

// Scans one file of the set: in byte ranges on several threads when it is a plain regular file
// and more than one thread (or cuts) are asked for, else with one reader.
FileScan ScanFile(const std::filesystem::path& path, const ScanOptions& options, LazySpillFolder& spill,
                  const std::string& spill_prefix, const ExpectedHeader& expected, FileIdentity& identity) {
  Descriptor file(path);
  identity = IdentityOf(file.get(), path.string());
  bool parallel = (options.threads > 1 || !options.range_cuts.empty()) && identity.regular;
  if (parallel) {
    char magic[4] = {};
    const std::size_t got = PreadSome(file.get(), magic, sizeof magic, 0, path.string());
    parallel = !StartsCompressed(magic, got);
  }
  return parallel ? ScanInRanges(path, file, identity, options, spill, spill_prefix, expected)
                  : ScanWhole(path, file, identity, options, spill, spill_prefix, expected);
}

// ---- data in memory (engine/column_source.h) ---------------------------------------------------

void AppendU64(std::string& bytes, std::uint64_t value) {
  for (int shift = 0; shift < 64; shift += 8) bytes.push_back(static_cast<char>((value >> shift) & 0xFF));
}

// Counts one level text of a cell into the tally (the CSV scan's rule) and returns its code.
std::uint32_t TallyLevel(ColumnTally& tally, std::string_view text, std::size_t max_levels) {
  if (tally.levels_overflowed) return kSpillNoCode;
  const auto found = tally.levels.find(text);
  if (found != tally.levels.end()) {
    ++found->second.count;
    return found->second.code;
  }
  if (tally.levels.size() < max_levels) {
    const auto code = static_cast<std::uint32_t>(tally.level_texts.size());
    tally.levels.emplace(std::string(text), LevelEntry{code, 1});
    tally.level_texts.emplace_back(text);
    return code;
  }
  DropLevels(tally);
  return kSpillNoCode;
}

ScanResult ScanColumns(ColumnSource& source, const ScanOptions& options) {
  const std::vector<MemoryColumn>& columns = source.columns();
  const std::string name = source.description();
  const std::size_t width = columns.size();
  const std::uint64_t rows = source.rows();
  if (width == 0) throw InputError(name + ": the data have no columns");
  if (options.csv.max_columns > 0 && width > options.csv.max_columns) {
    throw LimitError(LimitKind::kColumns, options.csv.max_columns, name, std::to_string(width) + " columns",
                     "select the columns the plan uses before the run");
  }
  ScanResult result;
  result.in_memory = true;
  for (std::size_t c = 0; c < width; ++c) {
    const std::string& column = columns[c].name;
    if (column.empty()) throw InputError(FormatLocation(name, 0, c + 1) + ": column " + std::to_string(c + 1) + " has no name");
    if (FirstInvalidUtf8(column) || FirstNulByte(column)) {
      throw InputError(name + ": the name of column " + std::to_string(c + 1) + " is not UTF-8 text without NUL bytes");
    }
    for (std::size_t before = 0; before < c; ++before) {
      if (columns[before].name == column) {
        throw InputError(name + ": column " + std::to_string(c + 1) + " repeats the name '" + QuoteForMessage(column) +
                         "' of column " + std::to_string(before + 1));
      }
    }
    result.header.push_back(column);
  }
  const std::size_t max_levels = options.profile.max_levels;
  std::unique_ptr<SpillFolder> folder;
  std::unique_ptr<SpillWriter> writer;
  std::filesystem::path spill_file;
  if (options.spill) {
    folder = std::make_unique<SpillFolder>(options.work_dir);
    spill_file = folder->NewFile("range-0.bin");
    writer = std::make_unique<SpillWriter>(spill_file, folder->work_dir(), width);
    writer->SetEstimatedTotalRows(rows);
  }
  std::vector<ColumnTally> tallies(width);
  std::vector<Sha256Stream> digests;
  digests.reserve(width);
  for (std::size_t c = 0; c < width; ++c) digests.emplace_back();
  const std::size_t chunk_rows = SpillChunkRowsFor(width);
  // One chunk of cells at a time, column by column (the caller's columns are read in slices).
  std::vector<std::uint64_t> bits(width * chunk_rows);
  std::vector<std::uint32_t> codes(width * chunk_rows);
  std::vector<double> numbers(chunk_rows);
  std::vector<std::string> texts;
  std::vector<char> missing;
  std::string canonical;
  for (std::uint64_t first = 0; first < rows; first += chunk_rows) {
    const auto count = static_cast<std::size_t>(std::min<std::uint64_t>(chunk_rows, rows - first));
    for (std::size_t c = 0; c < width; ++c) {
      ColumnTally& tally = tallies[c];
      std::uint64_t* column_bits = bits.data() + c * chunk_rows;
      std::uint32_t* column_codes = codes.data() + c * chunk_rows;
      canonical.clear();
      if (columns[c].kind == MemoryColumnKind::kNumber) {
        source.ReadNumbers(c, first, count, numbers.data());
        canonical.resize(count * 8);
        for (std::size_t i = 0; i < count; ++i) {
          const double value = numbers[i];
          const std::uint64_t row = first + i + 1;
          column_codes[i] = kSpillNoCode;
          std::uint64_t canonical_bits = SpillBits(value);
          if (std::isnan(value)) {
            ++tally.missing;
            column_bits[i] = kSpillMissingBits;
            canonical_bits = kCanonicalMissingBits;
          } else if (!std::isfinite(value)) {
            throw LocatedInputError(name, row, c + 1,
                                    "column '" + QuoteForMessage(columns[c].name) + "' holds " +
                                        (value > 0 ? "inf" : "-inf") + ", which is not a finite number");
          } else {
            ++tally.numeric_cells;
            ++tally.present;
            const double delta = value - tally.mean;
            tally.mean += delta / static_cast<double>(tally.numeric_cells);
            tally.squared_deviations += delta * (value - tally.mean);
            if (value < tally.min) {
              tally.min = value;
              tally.min_line = row;
              tally.min_column = c + 1;
            }
            if (value > tally.max) {
              tally.max = value;
              tally.max_line = row;
              tally.max_column = c + 1;
            }
            column_bits[i] = SpillBits(value);
            if (!tally.levels_overflowed) column_codes[i] = TallyLevel(tally, ShortestText(value), max_levels);
          }
          for (int shift = 0; shift < 64; shift += 8) {
            canonical[i * 8 + static_cast<std::size_t>(shift / 8)] = static_cast<char>((canonical_bits >> shift) & 0xFF);
          }
        }
      } else {
        texts.assign(count, std::string());
        missing.assign(count, 0);
        source.ReadTexts(c, first, count, texts, missing);
        for (std::size_t i = 0; i < count; ++i) {
          const std::uint64_t row = first + i + 1;
          column_codes[i] = kSpillNoCode;
          if (missing[i] != 0) {
            ++tally.missing;
            column_bits[i] = kSpillMissingBits;
            AppendU64(canonical, kCanonicalMissingText);
            continue;
          }
          const std::string& text = texts[i];
          if (FirstInvalidUtf8(text)) {
            throw LocatedInputError(name, row, c + 1, "column '" + QuoteForMessage(columns[c].name) +
                                                          "' holds text that is not UTF-8 (" + DescribeInvalidUtf8(text) + ")");
          }
          if (FirstNulByte(text)) {
            throw LocatedInputError(name, row, c + 1, "column '" + QuoteForMessage(columns[c].name) + "' holds a NUL byte");
          }
          ++tally.present;
          if (!tally.first_text) tally.first_text = CellLocation{row, c + 1, text, std::string()};
          column_bits[i] = kSpillTextBits;
          column_codes[i] = TallyLevel(tally, text, max_levels);
          AppendU64(canonical, text.size());
          canonical += text;
        }
      }
      digests[c].Update(canonical);
      result.stored_bytes += canonical.size();
    }
    if (writer) {
      for (std::size_t i = 0; i < count; ++i) {
        writer->BeginRow(first + i + 1, first + i);
        for (std::size_t c = 0; c < width; ++c) writer->Set(c, bits[c * chunk_rows + i], codes[c * chunk_rows + i]);
        writer->EndRow();
      }
    }
    source.OnRowsRead(first + count, rows);
  }
  std::string material(kColumnFingerprintTag);
  AppendU64(material, rows);
  AppendU64(material, width);
  for (std::size_t c = 0; c < width; ++c) {
    AppendU64(material, columns[c].name.size());
    material += columns[c].name;
    material.push_back(columns[c].kind == MemoryColumnKind::kNumber ? 'n' : 't');
    const Sha256Digest digest = digests[c].Finish();
    material.append(reinterpret_cast<const char*>(digest.data()), digest.size());
  }
  result.stored_bytes += material.size();
  result.sha256 = ToHex(Sha256(material));
  result.encoding = "memory";
  result.ranges = 1;
  result.profile.path = name;
  result.profile.rows = rows;
  const std::vector<std::string> file_names{name};
  for (std::size_t c = 0; c < width; ++c) {
    result.profile.columns.push_back(FinishColumn(result.header[c], c, tallies[c], max_levels, file_names));
  }
  if (writer) {
    std::vector<SpillRange> ranges(1);
    ranges[0].file = spill_file;
    ranges[0].rows = rows;
    ranges[0].chunks = writer->Finish();
    ranges[0].levels.resize(width);
    for (std::size_t c = 0; c < width; ++c) {
      if (!tallies[c].levels_overflowed) ranges[0].levels[c] = std::move(tallies[c].level_texts);
    }
    SpillSource spill_source;
    spill_source.path = name;
    spill_source.display_name = name;
    spill_source.header = result.header;
    result.spill = std::make_shared<Spill>(std::move(folder), std::move(ranges), width, std::move(spill_source));
  }
  return result;
}

// ---- Shares: several processes reading one data set (table_scan.h, "Shares") ----

void WriteTally(ByteWriter& out, const ColumnTally& tally) {
  out.U64(tally.present);
  out.U64(tally.missing);
  out.U64(tally.numeric_cells);
  out.F64(tally.mean);
  out.F64(tally.squared_deviations);
  out.F64(tally.min);
  out.F64(tally.max);
  out.U64(tally.min_line);
  out.U64(tally.min_column);
  out.U64(tally.max_line);
  out.U64(tally.max_column);
  out.U64(tally.levels_overflowed ? 1 : 0);
  out.U64(tally.levels.size());
  for (const auto& level : tally.levels) {
    out.Text(level.first);
    out.U64(level.second.code);
    out.U64(level.second.count);
  }
  out.U64(tally.first_text ? 1 : 0);
  if (tally.first_text) {
    out.U64(tally.first_text->line);
    out.U64(tally.first_text->column);
    out.Text(tally.first_text->text);
  }
}

ColumnTally ReadTally(ByteReader& in) {
  ColumnTally tally;
  tally.present = in.U64();
  tally.missing = in.U64();
  tally.numeric_cells = in.U64();
  tally.mean = in.F64();
  tally.squared_deviations = in.F64();
  tally.min = in.F64();
  tally.max = in.F64();
  tally.min_line = in.U64();
  tally.min_column = in.U64();
  tally.max_line = in.U64();
  tally.max_column = in.U64();
  tally.levels_overflowed = in.U64() != 0;
  const std::uint64_t levels = in.U64();
  for (std::uint64_t l = 0; l < levels; ++l) {
    std::string text = in.Text();
    LevelEntry entry;
    entry.code = static_cast<std::uint32_t>(in.U64());
    entry.count = in.U64();
    tally.levels.emplace(std::move(text), entry);
  }
  if (in.U64() != 0) {
    CellLocation location;
    location.line = in.U64();
    location.column = in.U64();
    location.text = in.Text();
    tally.first_text = std::move(location);
  }
  return tally;
}

// What every process knows of a range, whoever read it.
struct RangeSummary {
  std::uint64_t rows = 0;
  std::uint64_t line_ends = 0;
  std::uint64_t stop = 0;
  std::string error;  // an encoded error (share_exchange.h), or empty
  std::vector<ColumnTally> tallies;
};

void WriteRange(ByteWriter& out, const RangeScan& scan) {
  out.U64(scan.rows);
  out.U64(scan.line_ends);
  out.U64(scan.stop);
  out.Text(scan.error ? EncodeError(scan.error) : std::string());
  out.U64(scan.error ? 0 : scan.tallies.size());
  if (!scan.error) {
    for (const ColumnTally& tally : scan.tallies) WriteTally(out, tally);
  }
}

RangeSummary ReadRange(ByteReader& in) {
  RangeSummary range;
  range.rows = in.U64();
  range.line_ends = in.U64();
  range.stop = in.U64();
  range.error = in.Text();
  range.tallies.resize(in.U64());
  for (ColumnTally& tally : range.tallies) tally = ReadTally(in);
  return range;
}

void WriteHeader(ByteWriter& out, const std::vector<std::string>& header) {
  out.U64(header.size());
  for (const std::string& name : header) out.Text(name);
}

std::vector<std::string> ReadHeader(ByteReader& in) {
  std::vector<std::string> header(in.U64());
  for (std::string& name : header) name = in.Text();
  return header;
}

// Runs `work` (which returns this process's part) and exchanges the parts; every process throws
// the first error (in process order) when any process failed.
template <typename Work>
std::vector<std::string> ExchangeParts(ShareExchange& exchange, Work&& work) {
  std::string part;
  try {
    part = EncodeValue(work());
  } catch (...) {
    part = EncodeError(std::current_exception());
  }
  std::vector<std::string> parts = AllGather(exchange, part);
  RethrowFirstError(parts);
  return parts;
}

// One file as the processes share it.
struct SharedFileScan {
  std::vector<std::string> header;
  std::vector<RangeSummary> ranges;          // every range of the file, in order
  std::vector<std::uint64_t> lines_before;   // per range
  std::vector<std::size_t> own_ranges;       // indices of this process's ranges
  std::vector<RangeScan> own;                // their scans (spill file, chunks, level texts)
  std::string sha256;
  std::uint64_t stored_bytes = 0;
  std::string encoding = "plain";
  bool plain = true;
  FileIdentity identity;                     // as this process saw it (when it opened the file)
};

SharedFileScan ScanFileShared(const std::filesystem::path& path, std::size_t file_index, const ScanOptions& options,
                              LazySpillFolder& spill, const std::string& spill_prefix, const ExpectedHeader& expected,
                              ShareExchange& exchange) {
  const int me = exchange.index();
  const int count = exchange.count();
  const std::string name = path.string();
  SharedFileScan result;
  std::error_code status_error;
  const bool regular = std::filesystem::is_regular_file(path, status_error) && !status_error;
  std::unique_ptr<Descriptor> file;
  bool compressed = false;
  // Every process opens a regular file (to read its header and its ranges); a pipe or FIFO is
  // opened by process 0 alone, since a second reader would take bytes from the first.
  ExchangeParts(exchange, [&]() {
    if (regular) {
      file = std::make_unique<Descriptor>(path);
      result.identity = IdentityOf(file->get(), name);
      char magic[4] = {};
      const std::size_t got = PreadSome(file->get(), magic, sizeof magic, 0, name);
      compressed = StartsCompressed(magic, got);
    }
    return std::string();
  });

  if (!regular || compressed) {
    // One reader: process 0 for a stream, process (file index mod K) for a compressed file.
    const int owner = regular ? static_cast<int>(file_index % static_cast<std::size_t>(count)) : 0;
    FileScan whole;
    const std::vector<std::string> parts = ExchangeParts(exchange, [&]() -> std::string {
      if (me != owner) return std::string();
      if (!file) {
        file = std::make_unique<Descriptor>(path);
        result.identity = IdentityOf(file->get(), name);
      }
      whole = ScanWhole(path, *file, result.identity, options, spill, spill_prefix, expected);
      ByteWriter out;
      WriteHeader(out, whole.header);
      WriteRange(out, whole.ranges[0]);
      out.Text(whole.sha256);
      out.U64(whole.stored_bytes);
      out.Text(whole.encoding);
      out.U64(whole.plain ? 1 : 0);
      return out.Take();
    });
    ByteReader in(ValueOf(parts[static_cast<std::size_t>(owner)]));
    result.header = ReadHeader(in);
    result.ranges.push_back(ReadRange(in));
    result.sha256 = in.Text();
    result.stored_bytes = in.U64();
    result.encoding = in.Text();
    result.plain = in.U64() != 0;
    result.lines_before = {0};
    if (me == owner) {
      result.own_ranges = {0};
      result.own.push_back(std::move(whole.ranges[0]));
    }
    return result;
  }

  // Byte ranges: K x T of them, T per process (fewer for a small file; at least one each).
  const int fd = file->get();
  const std::uint64_t size = result.identity.size;
  std::uint64_t header_end = 0, header_lines = 0;
  std::vector<std::uint64_t> starts;
  std::size_t per_process = 1;
  std::vector<Sha256Digest> own_digests;
  std::string hash_error;
  auto own_first = [&](int process) { return static_cast<std::size_t>(process) * per_process; };
  auto owner_of = [&](std::size_t range) { return static_cast<int>(range / per_process); };
  std::size_t range_count = 0, blocks = 0;
  auto end_of = [&](std::size_t r) { return r + 1 < range_count ? starts[r + 1] : UINT64_MAX; };
  auto scan_range = [&](RangeScan& scan, std::size_t r, const std::string& file_name) {
    scan = RangeScan{};
    try {
      SpillFolder* folder = spill.Get();
      std::unique_ptr<SpillWriter> writer;
      if (folder != nullptr) {
        scan.spill_file = folder->NewFile(file_name);
        writer = std::make_unique<SpillWriter>(scan.spill_file, folder->work_dir(), result.header.size());
      }
      CsvReader reader(path, fd, CsvRange{starts[r], end_of(r), result.header}, options.csv);
      const std::uint64_t range_bytes = end_of(r) == UINT64_MAX ? size - std::min(size, starts[r])
                                                                : end_of(r) - std::min(end_of(r), starts[r]);
      ScanRecords(reader, options, writer.get(), starts[r], range_bytes, scan);
    } catch (...) {
      scan.error = std::current_exception();
    }
  };
  const std::vector<std::string> parts = ExchangeParts(exchange, [&]() {
    {
      const HeaderAtStart head = ReadHeaderAtStart(path, fd, name, options.csv);
      result.header = head.names;
      header_end = head.end;
      header_lines = head.lines;
    }
    CheckSameHeader(expected, result.header, name);
    spill.Get();
    const std::uint64_t body = size - header_end;
    const std::uint64_t by_size = std::max<std::uint64_t>(1, body / std::max<std::uint64_t>(1, options.min_range_bytes));
    per_process = static_cast<std::size_t>(
        std::max<std::uint64_t>(1, std::min<std::uint64_t>(options.threads, by_size / static_cast<std::uint64_t>(count))));
    range_count = per_process * static_cast<std::size_t>(count);
    std::vector<std::uint64_t> cuts;
    for (std::size_t r = 1; r < range_count; ++r) cuts.push_back(header_end + body * r / range_count);
    starts.assign(range_count, header_end);
    for (std::size_t r = 1; r < range_count; ++r) {
      const std::uint64_t cut = std::max(cuts[r - 1], header_end);
      starts[r] = std::max(starts[r - 1], cut == 0 ? 0 : NextLineStart(fd, cut - 1, size, name));
    }
    blocks = static_cast<std::size_t>((size + DataFingerprint::kBlockBytes - 1) / DataFingerprint::kBlockBytes);
    const std::size_t first = own_first(me);
    result.own.resize(per_process);
    for (std::size_t t = 0; t < per_process; ++t) result.own_ranges.push_back(first + t);
    std::vector<Sha256Digest> digests(blocks);
    std::vector<std::exception_ptr> hash_errors(per_process);
    detail::RunTasks(
        per_process,
        [&](std::size_t t) {
          const std::size_t r = first + t;
          scan_range(result.own[t], r, spill_prefix + "range-" + std::to_string(r) + ".bin");
          try {
            HashBlocks(fd, size, blocks * r / range_count, blocks * (r + 1) / range_count, digests, name);
          } catch (...) {
            hash_errors[t] = std::current_exception();
          }
        },
        "reading the data");
    CheckUnchanged(fd, result.identity, name);
    ByteWriter out;
    WriteHeader(out, result.header);
    out.U64(header_end);
    out.U64(header_lines);
    for (const RangeScan& scan : result.own) WriteRange(out, scan);
    const std::size_t block_first = blocks * first / range_count;
    const std::size_t block_last = blocks * (first + per_process) / range_count;
    for (std::size_t b = block_first; b < block_last; ++b) out.Raw(digests[b].data(), digests[b].size());
    std::string first_hash_error;
    for (const auto& error : hash_errors) {
      if (error && first_hash_error.empty()) first_hash_error = EncodeError(error);
    }
    out.Text(first_hash_error);
    return out.Take();
  });
  // Every process now reads every process's ranges, in file order.
  std::vector<Sha256Digest> digests(blocks);
  result.ranges.resize(range_count);
  std::vector<std::string> hash_errors;
  for (int process = 0; process < count; ++process) {
    ByteReader in(ValueOf(parts[static_cast<std::size_t>(process)]));
    ReadHeader(in);
    in.U64();
    in.U64();
    const std::size_t first = own_first(process);
    for (std::size_t t = 0; t < per_process; ++t) result.ranges[first + t] = ReadRange(in);
    const std::size_t block_first = blocks * first / range_count;
    const std::size_t block_last = blocks * (first + per_process) / range_count;
    for (std::size_t b = block_first; b < block_last; ++b) in.Raw(digests[b].data(), digests[b].size());
    hash_errors.push_back(in.Text());
  }
  // The guessed cuts checked in file order, as one process checks them (ScanInRanges).
  std::vector<std::uint64_t>& lines_before = result.lines_before;
  lines_before.assign(range_count, 0);
  lines_before[0] = header_lines;
  for (std::size_t r = 0; r < range_count; ++r) {
    if (r > 0) {
      lines_before[r] = lines_before[r - 1] + result.ranges[r - 1].line_ends;
      if (result.ranges[r - 1].stop != starts[r]) {
        starts[r] = result.ranges[r - 1].stop;
        const int owner = owner_of(r);
        const std::vector<std::string> again = ExchangeParts(exchange, [&]() -> std::string {
          if (owner != me) return std::string();
          RangeScan& scan = result.own[r - own_first(me)];
          scan_range(scan, r, spill_prefix + "range-" + std::to_string(r) + "-again.bin");
          ByteWriter out;
          WriteRange(out, scan);
          return out.Take();
        });
        ByteReader in(ValueOf(again[static_cast<std::size_t>(owner)]));
        result.ranges[r] = ReadRange(in);
      }
    }
    if (!result.ranges[r].error.empty()) {
      try {
        RethrowPart(result.ranges[r].error);
      } catch (const LocatedInputError& error) {
        throw error.WithLinesBefore(lines_before[r]);
      }
    }
  }
  for (const std::string& error : hash_errors) {
    if (!error.empty()) RethrowPart(error);
  }
  result.stored_bytes = size;
  result.sha256 = DataFingerprint::Combine(digests, size);
  result.plain = true;
  return result;
}

ScanResult ScanDataShared(const DataSet& data, const ScanOptions& options, ShareExchange& exchange) {
  std::vector<std::filesystem::path> files;
  ExchangeParts(exchange, [&]() {
    files = DataSetFiles(data);
    return std::string();
  });
  LazySpillFolder spill(options.spill, options.work_dir);
  SetScan set;
  for (std::size_t index = 0; index < files.size(); ++index) {
    const std::filesystem::path& path = files[index];
    const auto [expected, prefix] = set.BeginFile(path, index);
    SharedFileScan scan = ScanFileShared(path, index, options, spill, prefix, expected, exchange);
    set.TakeHeader(index, scan.header);
    std::uint64_t file_rows = 0;
    std::size_t own = 0;
    for (std::size_t r = 0; r < scan.ranges.size(); ++r) {
      if (options.spill && own < scan.own_ranges.size() && scan.own_ranges[own] == r) {
        set.spill_ranges.push_back(
            SpillRangeOf(scan.own[own++], set.rows_before + file_rows, scan.lines_before[r], index));
      }
      file_rows += scan.ranges[r].rows;
      set.MergeRange(scan.ranges[r].tallies, scan.lines_before[r], index, options.profile.max_levels);
    }
    if (options.spill) {
      set.sources.push_back(
          MakeSource(path, scan.identity, scan.plain && scan.identity.regular, set.result.header, options.csv));
    }
    set.AddFile(path, scan.stored_bytes, scan.sha256, scan.encoding, file_rows, scan.ranges.size());
  }
  // A process that read nothing still has a (empty) folder: the later passes expect one.
  if (options.spill) spill.Get();
  return set.Finish(data, options, spill);
}

}  // namespace

void ScanOptions::Validate() const {
  csv.Validate();
  if (threads < 1) throw InputError("threads: expected an integer >= 1, found " + std::to_string(threads));
  if (min_range_bytes < 1) throw InputError("min_range_bytes: expected an integer >= 1, found 0");
}

ScanResult ScanData(const DataSet& data, const ScanOptions& options) {
  options.Validate();
  if (data.columns) return ScanColumns(*data.columns, options);
  if (options.shares != nullptr && options.shares->count() > 1) return ScanDataShared(data, options, *options.shares);
  const std::vector<std::filesystem::path> files = DataSetFiles(data);
  // One folder for the spill of every file; removed with everything in it when the scan fails.
  LazySpillFolder spill(options.spill, options.work_dir);
  SetScan set;
  for (std::size_t index = 0; index < files.size(); ++index) {
    const std::filesystem::path& path = files[index];
    const auto [expected, prefix] = set.BeginFile(path, index);
    FileIdentity identity;
    FileScan scan = ScanFile(path, options, spill, prefix, expected, identity);
    set.TakeHeader(index, scan.header);
    std::uint64_t file_rows = 0;
    for (std::size_t r = 0; r < scan.ranges.size(); ++r) {
      file_rows += scan.ranges[r].rows;
      set.MergeRange(scan.ranges[r].tallies, scan.lines_before[r], index, options.profile.max_levels);
    }
    if (options.spill) {
      AppendSpillRanges(scan.ranges, scan.lines_before, set.rows_before, index, set.spill_ranges);
      set.sources.push_back(MakeSource(path, identity, scan.plain, set.result.header, options.csv));
    }
    set.AddFile(path, scan.stored_bytes, scan.sha256, scan.encoding, file_rows, scan.ranges.size());
  }
  return set.Finish(data, options, spill);
}

}  // namespace stepledger

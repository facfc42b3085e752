// Fuzz target: the one scan of a data file (engine/table_scan.h ScanData: CSV reading through
// the byte source, profiling, the fingerprint and the typed spill), on the bytes of a file.
//
// Checked: one reader with large blocks, and three readers with 61-byte blocks and cuts guessed
// at a third and two thirds of the bytes (at any byte, even inside a quoted field or the BOM),
// give the same profile, fingerprint and spilled cells (engine/table_scan.h promises exactly
// that), or the same message; the spill holds the rows the profile counts, and the level codes of
// every column that keeps its levels; nothing is left in the working folder; on a plain file the
// scan counts the records CsvReader returns. Only InputError is an acceptable exception.
// Slower per input than csv_reader_fuzz.cpp (files, threads, spill): the two are apart so that
// the reader alone gets many more inputs in the same time.

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "csv_read_text.h"
#include "fuzz_support.h"
#include "stepledger/engine/profile.h"
#include "stepledger/engine/spill.h"
#include "stepledger/engine/table_scan.h"

namespace stepledger::fuzz {
namespace {

// Few levels, so that columns overflow into too_many_levels and codes are dropped on the way.
constexpr std::size_t kMaxLevels = 3;
// Larger than any input (see csv_reader_fuzz.cpp), and an odd small block for the ranges.
constexpr std::size_t kWholeBlockBytes = std::size_t{1} << 16;
constexpr std::size_t kSmallBlockBytes = 61;

std::string Describe(const ColumnProfile& column) {
  std::string text = column.name + " " + ToString(column.kind) + " present=" + std::to_string(column.present) +
                     " missing=" + std::to_string(column.missing) + " numeric=" +
                     std::to_string(column.numeric_cells) + (column.too_many_levels ? " too_many" : "");
  if (column.kind == ColumnKind::kNumeric) {
    text += " min=";
    AppendNumber(text, column.min);
    text += " max=";
    AppendNumber(text, column.max);
  }
  for (const LevelCount& level : column.levels) text += " [" + level.level + "]x" + std::to_string(level.count);
  if (column.first_text) {
    text += " first_text@" + std::to_string(column.first_text->line) + ":" +
            std::to_string(column.first_text->column) + "[" + column.first_text->text + "]";
  }
  return text;
}

struct ScanOutcome {
  std::string text;
  std::uint64_t rows = 0;
  bool plain = false;
  bool ok = false;
};

// The scan as text: what must not depend on how the file was cut. Level codes are compared
// for the columns that keep their levels (then every range holds them, engine/spill.h).
ScanOutcome Scan(const std::filesystem::path& path, int threads, std::vector<std::uint64_t> cuts,
                 std::size_t block_bytes) {
  ScanOutcome outcome;
  ScanOptions options;
  options.csv.block_bytes = block_bytes;
  options.profile.max_levels = kMaxLevels;
  options.threads = threads;
  options.min_range_bytes = 1;
  options.range_cuts = std::move(cuts);
  options.work_dir = PrivateTempDir();
  try {
    const ScanResult scan = ScanData(path, options);
    std::string& text = outcome.text;
    text = scan.sha256 + " " + scan.encoding + " rows=" + std::to_string(scan.profile.rows) + "\n";
    for (const ColumnProfile& column : scan.profile.columns) text += Describe(column) + "\n";
    SpillReader reader(*scan.spill);
    SpillChunk chunk;
    std::uint64_t spilled = 0;
    while (reader.Next(chunk)) {
      const SpillRange& range = scan.spill->ranges()[chunk.range];
      for (std::size_t r = 0; r < chunk.rows; ++r) {
        text += std::to_string(range.rows_before + chunk.first_row + r) + "@" +
                std::to_string(range.lines_before + chunk.lines[r]) + "+" + std::to_string(chunk.offsets[r]);
        for (std::size_t c = 0; c < chunk.columns; ++c) {
          const double value = chunk.values(c)[r];
          text += " ";
          if (IsSpillMissing(value)) {
            text += "missing";
          } else if (IsSpillText(value)) {
            text += "text";
          } else {
            AppendNumber(text, value);
          }
          if (!scan.profile.columns[c].levels.empty()) {
            if (chunk.codes[c] == nullptr) {
              if (!IsSpillMissing(value)) Finding("the spill lost the level codes of a column that keeps its levels");
            } else if (chunk.codes[c][r] != kSpillNoCode) {
              if (chunk.codes[c][r] >= range.levels[c].size()) Finding("a spilled level code is out of range");
              text += "'" + range.levels[c][chunk.codes[c][r]] + "'";
            }
          }
        }
        text += "\n";
        ++spilled;
      }
    }
    if (spilled != scan.profile.rows) Finding("the spill holds a different number of rows than the profile counts");
    outcome.rows = scan.profile.rows;
    outcome.plain = scan.encoding == "plain";
    outcome.ok = true;
  } catch (const InputError& error) {
    outcome.text = std::string("error: ") + error.what();
  }
  // Nothing may be left in the working folder, after success or error.
  if (!std::filesystem::is_empty(PrivateTempDir())) {
    for (const auto& entry : std::filesystem::directory_iterator(PrivateTempDir())) {
      if (entry.path().filename() != path.filename()) Finding("the scan left " + entry.path().string() + " behind");
    }
  }
  return outcome;
}

void CheckScan(std::string_view bytes) {
  const std::filesystem::path path = PrivateTempDir() / "fuzz.csv";
  WriteFileOrDie(path, bytes);
  // A compressed file is read by one thread whatever the threads; how far a reader decodes before
  // it parses depends on its block size, so which of two errors comes first (a corrupt stream
  // after a bad record) does too. Compressed inputs are scanned with one block size.
  const bool compressed = bytes.starts_with("\x1f\x8b") || bytes.starts_with("\x28\xb5\x2f\xfd");
  const ScanOutcome one = Scan(path, 1, {}, compressed ? kSmallBlockBytes : kWholeBlockBytes);
  const ScanOutcome three = Scan(path, 3, {bytes.size() / 3, bytes.size() * 2 / 3}, kSmallBlockBytes);
  if (one.text != three.text) {
    Finding("ScanData with three ranges differs from one reader", "one reader:\n" + one.text +
                                                                      "\nthree ranges:\n" + three.text);
  }
  if (one.ok && one.plain) {
    const ReadOutcome read = ReadFromMemory(bytes, kWholeBlockBytes, SIZE_MAX);
    if (read.ok && one.rows != read.records) {
      Finding("ScanData counts " + std::to_string(one.rows) + " rows, CsvReader returned " +
              std::to_string(read.records));
    }
  }
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("table scan", [&] { CheckScan(AsText(data, size)); });
  return 0;
}

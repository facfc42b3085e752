// The one scan of a data file: parallel reading in byte ranges gives exactly what one reader
// gives (profile, fingerprint, rows and their lines, messages), wherever the cuts fall; the
// typed spill holds every cell and is removed afterwards, also after an error.

#include "stepledger/engine/table_scan.h"

#include <algorithm>
#include <cstring>
#include <filesystem>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "support/input_error.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::InputErrorOf;
using testing::TempDir;

// Quoted fields with embedded delimiters, doubled quotes and line ends (LF and CRLF), a BOM, a
// missing cell and no line end after the last record: every hazard for a cut.
const std::string kHazards =
    "\xEF\xBB\xBFprice,age,note\r\n"
    "100,1,plain\r\n"
    "200,2,\"a,b\"\n"
    "300,3,\"line one\nline two\"\n"
    "400,,\"say \"\"hi\"\"\"\n"
    "500,5,\"\n\n\"\n"
    "600,6,\"x\r\ny\"\r\n"
    "700,7,last";

// Everything a scan produced that must not depend on how the file was cut.
struct ScanDigest {
  std::string sha256;
  std::uint64_t rows = 0;
  std::vector<std::string> columns;  // one line per column: kind, counts, range, levels
  std::vector<std::string> cells;    // one line per row: index, line, offset, cells
  bool operator==(const ScanDigest&) const = default;
};

std::string Describe(const ColumnProfile& column) {
  std::string text = column.name + " " + ToString(column.kind) + " present=" + std::to_string(column.present) +
                     " missing=" + std::to_string(column.missing) + " numeric=" + std::to_string(column.numeric_cells);
  if (column.kind == ColumnKind::kNumeric) {
    text += " min=" + std::to_string(column.min) + " max=" + std::to_string(column.max) +
            " mean=" + std::to_string(column.mean);
    // Where the extremes are: their first cell in file order, whatever the cuts.
    if (column.min_at) {
      text += " min@" + std::to_string(column.min_at->line) + ":" + std::to_string(column.min_at->column) + "=" +
              column.min_at->text;
    }
    if (column.max_at) {
      text += " max@" + std::to_string(column.max_at->line) + ":" + std::to_string(column.max_at->column) + "=" +
              column.max_at->text;
    }
  }
  for (const LevelCount& level : column.levels) text += " [" + level.level + "]x" + std::to_string(level.count);
  if (column.first_text) {
    text += " first_text@" + std::to_string(column.first_text->line) + ":" + std::to_string(column.first_text->column);
  }
  return text;
}

ScanDigest Digest(const ScanResult& scan) {
  ScanDigest digest;
  digest.sha256 = scan.sha256;
  digest.rows = scan.profile.rows;
  for (const ColumnProfile& column : scan.profile.columns) digest.columns.push_back(Describe(column));
  SpillReader reader(*scan.spill);
  SpillChunk chunk;
  while (reader.Next(chunk)) {
    const SpillRange& range = scan.spill->ranges()[chunk.range];
    for (std::size_t r = 0; r < chunk.rows; ++r) {
      std::string row = std::to_string(range.rows_before + chunk.first_row + r) + " line " +
                        std::to_string(range.lines_before + chunk.lines[r]) + " at " + std::to_string(chunk.offsets[r]);
      for (std::size_t c = 0; c < chunk.columns; ++c) {
        const double value = chunk.values(c)[r];
        row += " | ";
        if (IsSpillMissing(value)) {
          row += "missing";
        } else if (IsSpillText(value)) {
          row += "text";
        } else {
          row += std::to_string(value);
        }
        if (chunk.codes[c] != nullptr && chunk.codes[c][r] != kSpillNoCode) {
          row += " '" + range.levels[c].at(chunk.codes[c][r]) + "'";
        }
      }
      digest.cells.push_back(row);
    }
  }
  return digest;
}

ScanOptions WithCuts(std::vector<std::uint64_t> cuts) {
  ScanOptions options;
  options.threads = static_cast<int>(cuts.size()) + 1;
  options.range_cuts = std::move(cuts);
  return options;
}

TEST(TableScanTest, OneReaderSeesEveryRowWithItsLineAndOffset) {
  TempDir dir;
  const auto path = dir.Write("hazards.csv", kHazards);
  const ScanResult scan = ScanData(path, ScanOptions{});
  EXPECT_EQ(scan.profile.rows, 7u);
  EXPECT_EQ(scan.header, (std::vector<std::string>{"price", "age", "note"}));
  DataFingerprint whole;
  whole.Update(kHazards);
  EXPECT_EQ(scan.sha256, whole.Finish());
  const ScanDigest digest = Digest(scan);
  ASSERT_EQ(digest.cells.size(), 7u);
  EXPECT_EQ(digest.cells[0], "0 line 2 at 19 | 100.000000 '100' | 1.000000 '1' | text 'plain'");
  EXPECT_EQ(digest.cells[2], "2 line 4 at 44 | 300.000000 '300' | 3.000000 '3' | text 'line one\nline two'");
  EXPECT_EQ(digest.cells[3].substr(0, 14), "3 line 6 at 70");
  EXPECT_NE(digest.cells[3].find("missing"), std::string::npos);
  EXPECT_EQ(digest.cells[6].substr(0, 17), "6 line 12 at 113 ");
}

// Every single cut and many pairs of cuts, wherever they fall (inside quoted fields, between a
// CR and its LF, inside the BOM or the header), give exactly the one-reader scan.
TEST(TableScanTest, EveryCutGivesTheSameScanAsOneReader) {
  TempDir dir;
  const auto path = dir.Write("hazards.csv", kHazards);
  const ScanDigest expected = Digest(ScanData(path, ScanOptions{}));
  for (std::uint64_t cut = 0; cut <= kHazards.size(); ++cut) {
    EXPECT_EQ(Digest(ScanData(path, WithCuts({cut}))), expected) << "cut at byte " << cut;
  }
  for (std::uint64_t first = 0; first <= kHazards.size(); first += 3) {
    for (std::uint64_t second = first; second <= kHazards.size(); second += 5) {
      EXPECT_EQ(Digest(ScanData(path, WithCuts({first, second}))), expected)
          << "cuts at bytes " << first << " and " << second;
    }
  }
}

// Levels and the first text of a column go into the audit and every --json: text that is not
// UTF-8 is refused where it is read, naming the cell, wherever the file is cut (a Latin-1 level
// ended in exit 3 at the JSON writer).
TEST(TableScanTest, TextThatIsNotUtf8IsRefusedAtItsCell) {
  TempDir dir;
  const auto path = dir.Write("levels.csv", "price,grade\n100,A\n90,B\n80,caf\xE9\n70,A\n");
  const std::string expected = path.string() + ":4:4: column 'grade' holds text that is not UTF-8 (byte 0xE9 at byte 4 "
                                               "of the cell); stepledger reads data files as UTF-8: convert the file "
                                               "first (for example from Latin-1)";
  EXPECT_EQ(InputErrorOf([&] { ScanData(path, ScanOptions{}); }), expected);
  for (std::uint64_t cut = 13; cut < 30; ++cut) {
    EXPECT_EQ(InputErrorOf([&] { ScanData(path, WithCuts({cut})); }), expected) << "cut at byte " << cut;
  }
  // In a numeric column too: its first text is kept for the profile's hint.
  const auto numeric = dir.Write("numeric.csv", "price,age\n100,1\n90,\xFF\n");
  EXPECT_NE(InputErrorOf([&] { ScanData(numeric, ScanOptions{}); }).find(":3:4: column 'age' holds text that is not UTF-8"),
            std::string::npos);
  // Control: the same level in UTF-8 is read.
  const auto utf8 = dir.Write("utf8.csv", "price,grade\n100,A\n90,caf\xC3\xA9\n");
  EXPECT_NO_THROW(ScanData(utf8, ScanOptions{}));
}

// A level or a column's first text holding a NUL byte (a binary or UTF-16 file) is refused at
// its cell, wherever the file is cut; it would otherwise be recorded as a level.
TEST(TableScanTest, TextHoldingANulByteIsRefusedAtItsCell) {
  TempDir dir;
  const auto path = dir.Write("levels.csv", std::string("price,grade\n100,A\n90,B\0\n70,A\n", 29));
  const std::string error = InputErrorOf([&] { ScanData(path, ScanOptions{}); });
  EXPECT_EQ(error.rfind(path.string() + ":3:4: column 'grade' holds a NUL byte (0x00) at byte 2 of the cell; ", 0), 0u)
      << error;
  for (std::uint64_t cut = 13; cut < 29; ++cut) {
    EXPECT_EQ(InputErrorOf([&] { ScanData(path, WithCuts({cut})); }), error) << "cut at byte " << cut;
  }
  const auto numeric = dir.Write("numeric.csv", std::string("price,age\n100,1\n90,\0\n", 21));
  EXPECT_NE(InputErrorOf([&] { ScanData(numeric, ScanOptions{}); }).find(":3:4: column 'age' holds a NUL byte"),
            std::string::npos);
}

// Every text cell is checked, not only the texts a tally keeps: past the levels limit one reader
// kept no more texts while a range starting later kept its first, so the file was accepted
// whole and refused when cut (found by fuzz/table_scan_fuzz.cpp).
TEST(TableScanTest, TextPastTheLevelsLimitIsCheckedWhereverTheFileIsCut) {
  TempDir dir;
  const auto path = dir.Write("levels.csv", "price,grade\n1,A\n2,B\n3,C\n4,D\n5,\xFF\n");
  ScanOptions options;
  options.profile.max_levels = 2;
  const std::string expected = InputErrorOf([&] { ScanData(path, options); });
  EXPECT_NE(expected.find(":6:3: column 'grade' holds text that is not UTF-8"), std::string::npos) << expected;
  for (std::uint64_t cut = 13; cut < 30; ++cut) {
    ScanOptions cut_options = WithCuts({cut});
    cut_options.profile.max_levels = 2;
    EXPECT_EQ(InputErrorOf([&] { ScanData(path, cut_options); }), expected) << "cut at byte " << cut;
  }
}

TEST(TableScanTest, AWideFileIsSpilledInChunksOfBoundedBytes) {
  // 5,000 columns: 16 MiB / (5,000 x 12 bytes) = 279 rows per chunk instead of 4,096 (whose
  // buffers would be 245 MB per reading thread; at 100,000 columns 4.9 GB, the quick form's
  // out-of-memory on such a file). Every cell still reads back in order.
  ASSERT_EQ(SpillChunkRowsFor(5'000), 279u);
  EXPECT_EQ(SpillChunkRowsFor(10'000), 139u);
  EXPECT_EQ(SpillChunkRowsFor(100), kSpillChunkRows);
  EXPECT_EQ(SpillChunkRowsFor(10'000'000), 1u);
  TempDir dir;
  std::string text = "c0";
  for (int c = 1; c < 5'000; ++c) text += ",c" + std::to_string(c);
  text += "\n";
  for (int row = 0; row < 600; ++row) {
    text += std::to_string(row);
    for (int c = 1; c < 5'000; ++c) text += "," + std::to_string(c % 7);
    text += "\n";
  }
  const auto path = dir.Write("wide.csv", text);
  ScanOptions options;
  options.csv.max_columns = 5'000;
  const ScanResult scan = ScanData(path, options);
  EXPECT_EQ(scan.spill->chunk_count(), 3u);  // 279 + 279 + 42 rows
  SpillReader reader(*scan.spill);
  SpillChunk chunk;
  std::uint64_t rows = 0;
  while (reader.Next(chunk)) {
    EXPECT_LE(chunk.rows, 279u);
    for (std::size_t r = 0; r < chunk.rows; ++r, ++rows) {
      ASSERT_EQ(chunk.values(0)[r], static_cast<double>(rows));
      ASSERT_EQ(chunk.values(4'999)[r], static_cast<double>(4'999 % 7));
    }
  }
  EXPECT_EQ(rows, 600u);
}

TEST(TableScanTest, AFileSmallerThanTheThreadsAndAFileOfOnlyAHeader) {
  TempDir dir;
  const auto tiny = dir.Write("tiny.csv", "a,b\n1,2\n");
  const ScanDigest expected = Digest(ScanData(tiny, ScanOptions{}));
  ScanOptions many;
  many.threads = 8;
  many.min_range_bytes = 1;
  EXPECT_EQ(Digest(ScanData(tiny, many)), expected);

  const auto header_only = dir.Write("header.csv", "a,b\n");
  const ScanResult scan = ScanData(header_only, many);
  EXPECT_EQ(scan.profile.rows, 0u);
  EXPECT_EQ(scan.spill->rows(), 0u);
}

// The profile says where a numeric column's smallest and largest values are (what the magnitude
// check of BuildDesign names): their first cell in file order, for one reader and for any cut.
// -3 and 9 appear twice each; the first -3 follows a quoted line end, so it sits on line 4.
TEST(TableScanTest, ExtremesAreTheirFirstCellsForEveryCut) {
  TempDir dir;
  const std::string text = "note,x\na,5\n\"two\nlines\",-3\nb,9\nc,-3\nd,9.0\n";
  const auto path = dir.Write("extremes.csv", text);
  for (std::uint64_t cut = 0; cut <= text.size(); ++cut) {
    const ScanResult scan = ScanData(path, WithCuts({cut}));
    const ColumnProfile& x = scan.profile.columns[1];
    ASSERT_TRUE(x.min_at && x.max_at) << "cut at byte " << cut;
    EXPECT_EQ(x.min_at->line, 4u) << "cut at byte " << cut;  // after the quoted line end
    EXPECT_EQ(x.min_at->column, 8u) << "cut at byte " << cut;
    EXPECT_EQ(x.min_at->text, "-3");
    EXPECT_EQ(x.max_at->line, 5u) << "cut at byte " << cut;
    EXPECT_EQ(x.max_at->column, 3u) << "cut at byte " << cut;
    EXPECT_EQ(x.max_at->text, "9");  // the value's shortest text, not the cell's
    EXPECT_FALSE(scan.profile.columns[0].min_at);  // categorical: no range
  }
}

// A bad cell near the end of the last range and a broken quote: the same message, with the line
// and column counted from the file's start, for one reader and for any cut.
TEST(TableScanTest, ErrorsNameTheSamePlaceForEveryCut) {
  TempDir dir;
  std::string text = "price,age\n";
  for (int row = 0; row < 40; ++row) text += std::to_string(100 + row) + "," + std::to_string(row) + "\n";
  const auto non_finite = dir.Write("nan.csv", text + "990,inf\n991,2\n");
  const auto broken = dir.Write("broken.csv", text + "992,\"3\n993,4\n");
  for (const auto& path : {non_finite, broken}) {
    const std::string expected = InputErrorOf([&] { ScanData(path, ScanOptions{}); });
    ASSERT_FALSE(expected.empty());
    for (std::uint64_t cut = 0; cut < std::filesystem::file_size(path); cut += 7) {
      EXPECT_EQ(InputErrorOf([&] { ScanData(path, WithCuts({cut})); }), expected) << "cut at " << cut;
      EXPECT_EQ(InputErrorOf([&] { ScanData(path, WithCuts({cut / 2, cut})); }), expected) << "cuts at " << cut;
    }
  }
  EXPECT_NE(InputErrorOf([&] { ScanData(non_finite, ScanOptions{}); }).find("nan.csv:42:5:"), std::string::npos);
  EXPECT_NE(InputErrorOf([&] { ScanData(broken, ScanOptions{}); }).find("broken.csv:42:5:"), std::string::npos);
}

bool FolderIsEmpty(const std::filesystem::path& folder) {
  return std::filesystem::is_empty(folder);
}

TEST(TableScanTest, TheSpillLivesInTheWorkingFolderAndIsRemovedAfterUseAndAfterAnError) {
  TempDir dir;
  const auto work = dir.path() / "work";
  std::filesystem::create_directory(work);
  const auto path = dir.Write("hazards.csv", kHazards);
  {
    ScanOptions options = WithCuts({30, 60});
    options.work_dir = work;
    const ScanResult scan = ScanData(path, options);
    EXPECT_EQ(scan.spill->folder().parent_path(), work);
    EXPECT_FALSE(FolderIsEmpty(work));
    EXPECT_GT(scan.spill->bytes(), 0u);
  }
  EXPECT_TRUE(FolderIsEmpty(work));

  std::string text = "price,age\n";
  for (int row = 0; row < 10000; ++row) text += std::to_string(row) + ",1\n";
  const auto bad = dir.Write("bad.csv", text + "1,nan\n");
  for (int threads : {1, 2}) {
    ScanOptions options;
    options.threads = threads;
    options.min_range_bytes = 1;
    options.work_dir = work;
    EXPECT_NE(InputErrorOf([&] { ScanData(bad, options); }).find("bad.csv:10002:3:"), std::string::npos);
    EXPECT_TRUE(FolderIsEmpty(work)) << threads << " threads";
  }
}

TEST(TableScanTest, AnUnwritableWorkingFolderIsAClearError) {
  TempDir dir;
  const auto path = dir.Write("hazards.csv", kHazards);
  ScanOptions options;
  options.work_dir = dir.path() / "no" / "such" / "folder";
  const std::string message = InputErrorOf([&] { ScanData(path, options); });
  EXPECT_NE(message.find((dir.path() / "no" / "such" / "folder").string()), std::string::npos) << message;
  EXPECT_NE(message.find("--work-dir"), std::string::npos) << message;
}

TEST(TableScanTest, ProfileOnlyWritesNoSpill) {
  TempDir dir;
  const auto path = dir.Write("hazards.csv", kHazards);
  ScanOptions options;
  options.spill = false;
  const ScanResult scan = ScanData(path, options);
  EXPECT_EQ(scan.spill, nullptr);
  EXPECT_EQ(scan.profile.rows, 7u);
}

// A cell error found in a later pass (a negative weight) names the cell's line and byte column,
// read again from the file, for every thread count.
TEST(TableScanTest, ALaterPassNamesTheCellAsTheTextHasIt) {
  TempDir dir;
  std::string text = "price,age,units\n";
  for (int row = 0; row < 50; ++row) text += std::to_string(100 + row) + "," + std::to_string(row) + ",1\n";
  text += "7,\"8\",-2.50\n";
  const auto path = dir.Write("weights.csv", text);
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  TermSpec age;
  age.name = "age";
  age.column = "age";
  age.key_path = "terms[0]";
  spec.terms = {age};
  for (const auto& cuts : std::vector<std::vector<std::uint64_t>>{{}, {200}, {100, 300}}) {
    const ScanResult scan = ScanData(path, WithCuts(cuts));
    const Design design = BuildDesign(spec, scan.profile);
    EXPECT_EQ(InputErrorOf([&] { RunFactorPass(*scan.spill, design, PassOptions{}); }),
              path.string() + ":52:7: weight '-2.50' in column 'units' is negative; precision weights must be >= 0");
  }
}

}  // namespace
}  // namespace stepledger

// Several processes sharing a scan (engine/share_exchange.h, engine/table_scan.h "Shares"),
// played by threads over an in-process exchange: every process ends with the profile and
// fingerprint of one reader, the processes' spills together hold every row once with its record
// index and line, wherever the cuts between processes fall (quoted fields with line ends), for a
// file and a data set, and an error in any process's range reaches every process as one reader
// reports it. The byte codec round-trips exactly. No MPI needed.

#include "stepledger/engine/share_exchange.h"

#include <algorithm>
#include <filesystem>
#include <optional>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/table_scan.h"
#include "support/test_paths.h"
#include "support/thread_exchange.h"

namespace stepledger {
namespace {

using testing::Mailboxes;
using testing::TempDir;
using testing::ThreadExchange;

// What a scan gives that must not depend on the processes: per process the profile and
// fingerprint; over all processes every row (index, line, cells).
struct SharedOutcome {
  std::vector<std::string> per_process;  // profile and fingerprint text of each process
  std::vector<std::string> rows;         // every process's rows, by record index
  std::vector<std::string> errors;       // what each process threw ("" for none)
};

std::string ProfileText(const ScanResult& scan) {
  std::string text = scan.sha256 + " rows=" + std::to_string(scan.profile.rows);
  for (const std::string& name : scan.header) text += " " + name;
  for (const ColumnProfile& column : scan.profile.columns) {
    text += "\n" + column.name + " " + ToString(column.kind) + " " + std::to_string(column.present) + "/" +
            std::to_string(column.missing) + " mean=" + std::to_string(column.mean) + " sd=" + std::to_string(column.sd);
    if (column.min_at) text += " min@" + std::to_string(column.min_at->line) + ":" + column.min_at->file;
    if (column.max_at) text += " max@" + std::to_string(column.max_at->line) + ":" + column.max_at->file;
    for (const LevelCount& level : column.levels) text += " [" + level.level + "]x" + std::to_string(level.count);
    if (column.first_text) text += " first@" + std::to_string(column.first_text->line);
  }
  for (const ScannedFile& file : scan.files) text += "\n" + file.sha256 + " " + std::to_string(file.rows);
  return text;
}

void AppendRows(const ScanResult& scan, std::vector<std::pair<std::uint64_t, std::string>>& rows) {
  SpillReader reader(*scan.spill);
  SpillChunk chunk;
  while (reader.Next(chunk)) {
    const SpillRange& range = scan.spill->ranges()[chunk.range];
    for (std::size_t r = 0; r < chunk.rows; ++r) {
      const std::uint64_t index = range.rows_before + chunk.first_row + r;
      std::string row = std::to_string(index) + " line " + std::to_string(range.lines_before + chunk.lines[r]) + " of " +
                        scan.spill->sources().at(range.source).path.filename().string();
      for (std::size_t c = 0; c < chunk.columns; ++c) {
        const double value = chunk.values(c)[r];
        row += " | " + (IsSpillMissing(value) ? std::string("missing")
                                               : IsSpillText(value) ? std::string("text") : std::to_string(value));
        if (chunk.codes[c] != nullptr && chunk.codes[c][r] != kSpillNoCode) {
          row += " '" + range.levels[c].at(chunk.codes[c][r]) + "'";
        }
      }
      rows.emplace_back(index, row);
    }
  }
}

SharedOutcome ScanShared(const DataSet& data, int processes, int threads) {
  Mailboxes boxes;
  std::vector<std::optional<ScanResult>> scans(static_cast<std::size_t>(processes));
  SharedOutcome outcome;
  outcome.errors.resize(static_cast<std::size_t>(processes));
  std::vector<std::thread> workers;
  for (int p = 0; p < processes; ++p) {
    workers.emplace_back([&, p] {
      ThreadExchange exchange(boxes, p, processes);
      ScanOptions options;
      options.threads = threads;
      options.min_range_bytes = 1;  // cut tiny files too
      options.shares = &exchange;
      try {
        scans[static_cast<std::size_t>(p)] = ScanData(data, options);
      } catch (const std::exception& error) {
        outcome.errors[static_cast<std::size_t>(p)] = error.what();
      }
    });
  }
  for (std::thread& worker : workers) worker.join();
  std::vector<std::pair<std::uint64_t, std::string>> rows;
  for (const auto& scan : scans) {
    if (!scan) continue;
    outcome.per_process.push_back(ProfileText(*scan));
    AppendRows(*scan, rows);
  }
  std::sort(rows.begin(), rows.end());
  for (auto& row : rows) outcome.rows.push_back(std::move(row.second));
  return outcome;
}

SharedOutcome ScanAlone(const DataSet& data) {
  SharedOutcome outcome;
  const ScanResult scan = ScanData(data, ScanOptions{});
  outcome.per_process.push_back(ProfileText(scan));
  std::vector<std::pair<std::uint64_t, std::string>> rows;
  AppendRows(scan, rows);
  for (auto& row : rows) outcome.rows.push_back(std::move(row.second));
  return outcome;
}

// Quoted fields with line ends in almost every record, so that the guessed cuts between the
// processes fall inside quotes and the owners must read again from the true boundaries.
std::string QuotedLines(int records, int first_value) {
  std::string text;
  for (int i = 0; i < records; ++i) {
    const int value = first_value + i;
    text += std::to_string(value * 3 % 17) + "," + std::to_string(value) + ",\"note " + std::to_string(value) +
            ",\n\"\"second\"\" line\n" + (value % 3 == 0 ? "" : "third line") + "\"," + (value % 2 ? "A" : "B") + "\n";
  }
  return text;
}

constexpr const char* kHeader = "price,age,note,grade\n";

TEST(ShareExchangeTest, ByteCodecAndFactorsRoundTripExactly) {
  ByteWriter out;
  out.U64(18446744073709551615ULL);
  out.F64(-0.1);
  out.Text(std::string("a\0b", 3));
  Factor factor;
  factor.r = {{1.5, -2.25}, {0, 0x1p-1000}};
  factor.scales = {1, 0.5, 4};
  factor.rows = 7;
  factor.weight_sum = 6.5;
  factor.log_weight_sum = -0.3;
  factor.column_stats.resize(2);
  factor.column_stats[1].count = 3;
  factor.column_stats[1].m2 = 1e-300;
  WriteFactor(out, factor);
  ByteReader in(out.bytes());
  EXPECT_EQ(in.U64(), 18446744073709551615ULL);
  EXPECT_EQ(in.F64(), -0.1);
  EXPECT_EQ(in.Text(), std::string("a\0b", 3));
  const Factor back = ReadFactor(in);
  EXPECT_TRUE(in.done());
  EXPECT_TRUE(arma::approx_equal(back.r, factor.r, "absdiff", 0.0));
  EXPECT_EQ(back.scales, factor.scales);
  EXPECT_EQ(back.rows, 7u);
  EXPECT_EQ(back.weight_sum, 6.5);
  EXPECT_EQ(back.log_weight_sum, -0.3);
  ASSERT_EQ(back.column_stats.size(), 2u);
  EXPECT_EQ(back.column_stats[1].count, 3u);
  EXPECT_EQ(back.column_stats[1].m2, 1e-300);
  EXPECT_THROW(in.U64(), std::logic_error);  // past the end: a bug
}

TEST(ShareExchangeTest, ErrorsCrossAsTheirKind) {
  const std::string located = EncodeError(std::make_exception_ptr(LocatedInputError("d.csv", 5, 3, "bad cell")));
  ASSERT_TRUE(HoldsError(located));
  try {
    RethrowPart(located);
    FAIL() << "no throw";
  } catch (const LocatedInputError& error) {
    EXPECT_EQ(error.file(), "d.csv");
    EXPECT_EQ(error.line(), 5u);
    EXPECT_EQ(error.column(), 3u);
    EXPECT_EQ(std::string(error.WithLinesBefore(10).what()), "d.csv:15:3: bad cell");
  }
  EXPECT_THROW(RethrowPart(EncodeError(std::make_exception_ptr(NumericalError("x")))), NumericalError);
  EXPECT_THROW(RethrowPart(EncodeError(std::make_exception_ptr(ResourceError("x")))), ResourceError);
  try {
    RethrowPart(EncodeError(std::make_exception_ptr(PlanError("terms[1]", "no such column"))));
    FAIL() << "no throw";
  } catch (const InputError& error) {
    EXPECT_EQ(std::string(error.what()), "plan key 'terms[1]': no such column");
  }
  const std::string value = EncodeValue("abc");
  EXPECT_FALSE(HoldsError(value));
  EXPECT_EQ(ValueOf(value), "abc");
  EXPECT_NO_THROW(RethrowFirstError({value, value}));
  EXPECT_THROW(RethrowFirstError({value, located}), LocatedInputError);
}

TEST(ShareExchangeTest, SharedScanOfAFileEqualsOneReader) {
  TempDir dir;
  const auto path = dir.Write("quoted.csv", std::string(kHeader) + QuotedLines(40, 1));
  const SharedOutcome alone = ScanAlone(path);
  for (int processes = 1; processes <= 4; ++processes) {
    for (int threads = 1; threads <= 2; ++threads) {
      const SharedOutcome shared = ScanShared(path, processes, threads);
      ASSERT_EQ(shared.per_process.size(), static_cast<std::size_t>(processes))
          << processes << " processes: " << shared.errors[0];
      for (const std::string& text : shared.per_process) EXPECT_EQ(text, alone.per_process[0]);
      EXPECT_EQ(shared.rows, alone.rows) << processes << " processes, " << threads << " threads";
    }
  }
}

TEST(ShareExchangeTest, SharedScanOfASetEqualsOneReaderWithAFileSmallerThanTheProcesses) {
  TempDir dir;
  const auto folder = dir.path() / "set";
  std::filesystem::create_directory(folder);
  dir.Write("set/a.csv", std::string(kHeader) + QuotedLines(25, 1));
  dir.Write("set/b.csv", std::string(kHeader) + QuotedLines(1, 26));
  dir.Write("set/c.csv", std::string(kHeader) + QuotedLines(30, 27));
  const SharedOutcome alone = ScanAlone(folder);
  for (int processes = 2; processes <= 3; ++processes) {
    const SharedOutcome shared = ScanShared(folder, processes, 1);
    ASSERT_EQ(shared.per_process.size(), static_cast<std::size_t>(processes)) << shared.errors[0];
    for (const std::string& text : shared.per_process) EXPECT_EQ(text, alone.per_process[0]);
    EXPECT_EQ(shared.rows, alone.rows) << processes << " processes";
  }
}

TEST(ShareExchangeTest, AnErrorInTheLastRangeReachesEveryProcessAsOneReaderSaysIt) {
  TempDir dir;
  const auto path =
      dir.Write("bad.csv", std::string(kHeader) + QuotedLines(30, 1) + "inf,31,\"x\ny\",A\n" + QuotedLines(2, 32));
  std::string expected;
  try {
    ScanData(path, ScanOptions{});
  } catch (const InputError& error) {
    expected = error.what();
  }
  ASSERT_NE(expected.find("bad.csv:"), std::string::npos) << expected;
  for (int processes = 2; processes <= 3; ++processes) {
    const SharedOutcome shared = ScanShared(path, processes, 1);
    ASSERT_TRUE(shared.per_process.empty());
    for (const std::string& error : shared.errors) EXPECT_EQ(error, expected) << processes << " processes";
  }
}

}  // namespace
}  // namespace stepledger

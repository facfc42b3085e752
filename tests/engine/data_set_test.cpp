// Data sets: which files a folder holds and in what order, the errors for a set that cannot be
// formed, one scan over several files (same header required, record indices across the set,
// lines and messages per file) and the set's fingerprint, checked against the README's worked
// example.

#include "stepledger/engine/data_set.h"

#include <sys/stat.h>

#include <filesystem>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/spill.h"
#include "stepledger/engine/table_scan.h"
#include "support/input_error.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::InputErrorOf;
using testing::TempDir;

// The README's worked example ("Data sets"): three small files and their fingerprints. The
// expected values were computed from the documented formulas with Python's hashlib (SHA-256 of
// SHA-256(bytes) || le64(size) for one file under 1 MiB; SHA-256 of the three fingerprints, each
// followed by a line feed, for the set).
constexpr const char* kFileA = "price,age\n100,1\n200,2\n";
constexpr const char* kFileB = "price,age\n300,3\n";
constexpr const char* kFileC = "price,age\n400,4\n500,5\n";
constexpr const char* kFingerprintA = "736e652b1825a7ded0d45da51696f1bd7fda1c49dd32e68809cd0f074d75a522";
constexpr const char* kFingerprintB = "c115bfe2c8031287ab5f9d42fb51cc99f497bdcf9a85c1ddeb998d0bc8a8daa1";
constexpr const char* kFingerprintC = "09245919ce3d8808385f159897e9e11087b0f9917d3cb44452b3d8a1a5e9a059";
constexpr const char* kSetFingerprint = "e0739dad112392d5771a919ec681169a033e94fcf9ad79623dde8b417ae145b1";

ScanOptions Options(int threads = 1) {
  ScanOptions options;
  options.threads = threads;
  options.min_range_bytes = 1;
  return options;
}

std::vector<std::string> Names(const std::vector<std::filesystem::path>& paths) {
  std::vector<std::string> names;
  for (const auto& path : paths) names.push_back(path.filename().string());
  return names;
}

TEST(RowPlaceText, OneFileByLineASetByLineAndFile) {
  EXPECT_EQ(RowPlaceText(12, 0, {}), "line 12");
  EXPECT_EQ(RowPlaceText(12, 1, {"a.csv", "b.csv"}), "line 12 of b.csv");
  EXPECT_EQ(RowPlaceText(3, 0, {"a.csv", "b.csv"}), "line 3 of a.csv");
}

TEST(DataSetFingerprint, WorkedExampleOfTheReadme) {
  TempDir dir;
  std::filesystem::create_directory(dir.path() / "sales");
  dir.Write("sales/a.csv", kFileA);
  dir.Write("sales/b.csv", kFileB);
  dir.Write("sales/c.csv", kFileC);
  for (int threads : {1, 2}) {
    const ScanResult scan = ScanData(dir.path() / "sales", Options(threads));
    ASSERT_EQ(scan.files.size(), 3u);
    EXPECT_EQ(scan.files[0].sha256, kFingerprintA);
    EXPECT_EQ(scan.files[1].sha256, kFingerprintB);
    EXPECT_EQ(scan.files[2].sha256, kFingerprintC);
    EXPECT_EQ(scan.files[0].stored_bytes, 22u);
    EXPECT_EQ(scan.files[1].rows, 1u);
    EXPECT_EQ(scan.sha256, kSetFingerprint) << "threads " << threads;
    EXPECT_EQ(scan.stored_bytes, 60u);
    EXPECT_EQ(scan.profile.rows, 5u);
  }
  // The same files named one by one, in the same order, are the same set.
  const ScanResult listed = ScanData(
      DataSet({dir.path() / "sales/a.csv", dir.path() / "sales/b.csv", dir.path() / "sales/c.csv"}), Options());
  EXPECT_EQ(listed.sha256, kSetFingerprint);
  // One file alone keeps its own fingerprint (a set of one is the file).
  EXPECT_EQ(ScanData(dir.path() / "sales/a.csv", Options()).sha256, kFingerprintA);
  EXPECT_EQ(CombineMemberFingerprints({kFingerprintA}), kFingerprintA);
  EXPECT_EQ(CombineMemberFingerprints({kFingerprintA, kFingerprintB, kFingerprintC}), kSetFingerprint);
}

TEST(DataSetFingerprint, OrderCountsAndNamesDoNot) {
  TempDir dir;
  const auto a = dir.Write("a.csv", kFileA);
  const auto b = dir.Write("b.csv", kFileB);
  const auto renamed = dir.Write("renamed.csv", kFileA);
  const std::string forward = ScanData(DataSet({a, b}), Options()).sha256;
  EXPECT_NE(ScanData(DataSet({b, a}), Options()).sha256, forward);
  EXPECT_EQ(ScanData(DataSet({renamed, b}), Options()).sha256, forward);
}

TEST(DataSetFiles, AFolderIsReadInByteOrderOfItsNames) {
  TempDir dir;
  const auto folder = dir.path() / "parts";
  std::filesystem::create_directory(folder);
  // Byte order: upper case before lower case, "10" before "9".
  for (const char* name : {"part-9.csv", "part-10.csv", "Part-Z.CSV", "b.csv.gz", "a.tsv", "c.csv.zst"}) {
    dir.Write(std::string("parts/") + name, kFileA);
  }
  dir.Write("parts/.hidden-lock", "not data");  // hidden files are not members
  EXPECT_EQ(Names(DataSetFiles(folder)),
            (std::vector<std::string>{"Part-Z.CSV", "a.tsv", "b.csv.gz", "c.csv.zst", "part-10.csv", "part-9.csv"}));
  // Given one by one, files keep the order given.
  const auto z = dir.Write("z.csv", kFileA);
  const auto y = dir.Write("y.csv", kFileA);
  EXPECT_EQ(Names(DataSetFiles(DataSet({z, y}))), (std::vector<std::string>{"z.csv", "y.csv"}));
}

TEST(DataSetFiles, SetsThatCannotBeFormedAreErrorsNamingTheInput) {
  TempDir dir;
  const auto folder = dir.path() / "data";
  std::filesystem::create_directory(folder);
  EXPECT_NE(InputErrorOf([&] { DataSetFiles(folder); }).find("holds no data file"), std::string::npos);

  dir.Write("data/a.csv", kFileA);
  dir.Write("data/notes.txt", "a stray file");
  const std::string stray = InputErrorOf([&] { DataSetFiles(folder); });
  EXPECT_NE(stray.find("'notes.txt'"), std::string::npos) << stray;
  EXPECT_NE(stray.find("not a data file"), std::string::npos) << stray;
  std::filesystem::remove(folder / "notes.txt");

  std::filesystem::create_directory(folder / "old");
  const std::string subfolder = InputErrorOf([&] { DataSetFiles(folder); });
  EXPECT_NE(subfolder.find("the folder 'old'"), std::string::npos) << subfolder;
  std::filesystem::remove(folder / "old");

  ASSERT_EQ(::mkfifo((folder / "pipe.csv").c_str(), 0600), 0);
  const std::string fifo = InputErrorOf([&] { DataSetFiles(folder); });
  EXPECT_NE(fifo.find("'pipe.csv', which is not a regular file"), std::string::npos) << fifo;
  std::filesystem::remove(folder / "pipe.csv");

  const auto b = dir.Write("b.csv", kFileB);
  const std::string missing = InputErrorOf([&] { DataSetFiles(DataSet({b, dir.path() / "nowhere.csv"})); });
  EXPECT_NE(missing.find("nowhere.csv' (data file 2 of 2)"), std::string::npos) << missing;
  const std::string mixed = InputErrorOf([&] { DataSetFiles(DataSet({b, folder})); });
  EXPECT_NE(mixed.find("is a folder; give either one folder or data files"), std::string::npos) << mixed;
  const std::string twice = InputErrorOf([&] { DataSetFiles(DataSet({b, dir.path() / "." / "b.csv"})); });
  EXPECT_NE(twice.find("is the same file as data file 1"), std::string::npos) << twice;
}

TEST(DataSetScan, DifferentHeadersNameBothFilesAndTheColumn) {
  TempDir dir;
  const auto a = dir.Write("a.csv", "price,age,grade\n1,2,A\n");
  const auto renamed = dir.Write("b.csv", "price,months,grade\n1,2,A\n");
  const auto shorter = dir.Write("c.csv", "price,age\n1,2\n");
  const auto longer = dir.Write("d.csv", "price,age,grade,extra\n1,2,A,4\n");
  for (int threads : {1, 2}) {
    const std::string message = InputErrorOf([&] { ScanData(DataSet({a, renamed}), Options(threads)); });
    EXPECT_EQ(message, renamed.string() + ":1: the header differs from the header of '" + a.string() +
                           "': column 2 is 'months' here and 'age' in '" + a.string() +
                           "'; every file of a data set must have the same header");
  }
  EXPECT_NE(InputErrorOf([&] { ScanData(DataSet({a, shorter}), Options()); })
                .find("column 3 ('grade' in '" + a.string() + "') is missing here (2 columns"),
            std::string::npos);
  EXPECT_NE(InputErrorOf([&] { ScanData(DataSet({a, longer}), Options()); }).find("column 4 ('extra') is extra here"),
            std::string::npos);
}

TEST(DataSetScan, AnEmptyFileIsAnErrorAndAHeaderAloneAddsNoRows) {
  TempDir dir;
  const auto a = dir.Write("a.csv", kFileA);
  const auto empty = dir.Write("empty.csv", "");
  const auto header_only = dir.Write("header.csv", "price,age\n");
  for (int threads : {1, 2}) {
    const std::string message = InputErrorOf([&] { ScanData(DataSet({a, empty}), Options(threads)); });
    EXPECT_NE(message.find(empty.string() + ":1:1: the file is empty"), std::string::npos) << message;
    const ScanResult scan = ScanData(DataSet({a, header_only}), Options(threads));
    EXPECT_EQ(scan.profile.rows, 2u);
    ASSERT_EQ(scan.files.size(), 2u);
    EXPECT_EQ(scan.files[1].rows, 0u);
  }
}

TEST(DataSetScan, ABadCellNamesItsFileAndItsOwnLine) {
  TempDir dir;
  const auto a = dir.Write("a.csv", "price,age\n1,2\n3,4\n5,6\n");
  const auto b = dir.Write("b.csv", "price,age\n7,8\n9,inf\n");
  for (int threads : {1, 2}) {
    const std::string message = InputErrorOf([&] { ScanData(DataSet({a, b}), Options(threads)); });
    EXPECT_EQ(message.rfind(b.string() + ":3:3: ", 0), 0u) << message;
  }
}

TEST(DataSetScan, RowsCountAcrossFilesAndLocationsNameTheirFile) {
  TempDir dir;
  const auto a = dir.Write("a.csv", "price,age,grade\n1,5,A\n2,6,A\n");
  const auto b = dir.Write("b.csv", "price,age,grade\n3,9,B\n4,1,B\n5,7,text\n");
  for (int threads : {1, 2}) {
    const ScanResult scan = ScanData(DataSet({a, b}), Options(threads));
    EXPECT_EQ(scan.profile.rows, 5u);
    const ColumnProfile* age = scan.profile.Find("age");
    ASSERT_NE(age, nullptr);
    ASSERT_TRUE(age->max_at && age->min_at);
    EXPECT_EQ(age->max_at->file, b.string());
    EXPECT_EQ(age->max_at->line, 2u);
    EXPECT_EQ(age->min_at->file, b.string());
    EXPECT_EQ(age->min_at->line, 3u);
    // The spill: ranges of each file in order, record indices across the set, lines per file.
    ASSERT_TRUE(scan.spill);
    ASSERT_EQ(scan.spill->sources().size(), 2u);
    std::uint64_t expected_before = 0;
    for (const SpillRange& range : scan.spill->ranges()) {
      EXPECT_EQ(range.rows_before, expected_before);
      expected_before += range.rows;
    }
    EXPECT_EQ(scan.spill->ranges().back().source, 1u);
    EXPECT_EQ(scan.spill->source_of_range(scan.spill->ranges().size() - 1).path, b);
  }
}

TEST(DataSetScan, ASingleFileReadsAsBefore) {
  TempDir dir;
  const auto a = dir.Write("a.csv", kFileA);
  const ScanResult scan = ScanData(a, Options());
  EXPECT_EQ(scan.sha256, kFingerprintA);
  EXPECT_EQ(scan.profile.path, a);
  ASSERT_EQ(scan.files.size(), 1u);
  EXPECT_EQ(scan.encoding, "plain");
  EXPECT_EQ(DataSetFileName(a), "a.csv");
  EXPECT_EQ(DataSetFileName(dir.path() / "folder/"), "folder");
  EXPECT_EQ(DescribeDataSet(DataSet({"a.csv", "b.csv", "c.csv", "d.csv", "e.csv"})),
            "a.csv, b.csv, c.csv and 2 more");
}

}  // namespace
}  // namespace stepledger

// Data in memory (engine/column_source.h) read by ScanData: the same profile, the same typed
// spill and the same factor as the same data written as CSV; the fingerprint of the documented
// canonical form; errors naming memory:ROW:COLUMN; nothing left in the working folder.

#include <cmath>
#include <cstring>
#include <filesystem>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/column_source.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/table_scan.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::TempDir;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Columns held in vectors; a text cell that is nullopt is missing.
class VectorColumns : public ColumnSource {
 public:
  void AddNumbers(std::string name, std::vector<double> values) {
    columns_.push_back({std::move(name), MemoryColumnKind::kNumber});
    numbers_.push_back(std::move(values));
    texts_.emplace_back();
  }
  void AddTexts(std::string name, std::vector<std::optional<std::string>> values) {
    columns_.push_back({std::move(name), MemoryColumnKind::kText});
    numbers_.emplace_back();
    texts_.push_back(std::move(values));
  }
  const std::vector<MemoryColumn>& columns() const override { return columns_; }
  std::uint64_t rows() const override {
    return columns_.empty() ? 0 : (columns_[0].kind == MemoryColumnKind::kNumber ? numbers_[0].size() : texts_[0].size());
  }
  void ReadNumbers(std::size_t column, std::uint64_t first, std::size_t count, double* out) override {
    std::memcpy(out, numbers_[column].data() + first, count * sizeof(double));
  }
  void ReadTexts(std::size_t column, std::uint64_t first, std::size_t count, std::vector<std::string>& texts,
                 std::vector<char>& missing) override {
    for (std::size_t i = 0; i < count; ++i) {
      const auto& cell = texts_[column][first + i];
      missing[i] = cell ? 0 : 1;
      if (cell) texts[i] = *cell;
    }
  }
  void OnRowsRead(std::uint64_t done, std::uint64_t total) override {
    last_done = done;
    last_total = total;
  }
  std::uint64_t last_done = 0, last_total = 0;

 private:
  std::vector<MemoryColumn> columns_;
  std::vector<std::vector<double>> numbers_;
  std::vector<std::vector<std::optional<std::string>>> texts_;
};

// 10,000 rows (three spill chunks) of y, x (with missing cells) and a grade with missing cells.
std::shared_ptr<VectorColumns> MakeColumns(std::string* csv) {
  auto columns = std::make_shared<VectorColumns>();
  std::vector<double> y, x;
  std::vector<std::optional<std::string>> grade;
  *csv = "y,x,grade\n";
  const char* levels[] = {"A", "B", "C"};
  for (int row = 0; row < 10000; ++row) {
    const double xv = (row % 97) * 0.25 - 3.0;
    const bool x_missing = row % 501 == 7;
    const bool grade_missing = row % 733 == 5;
    const std::string level = levels[(row * 7) % 3];
    const double yv = 1.5 + 2.0 * xv + (level == "A" ? 1.0 : level == "B" ? -0.5 : 0.0) + ((row * 37) % 11) * 0.125;
    y.push_back(yv);
    x.push_back(x_missing ? kNaN : xv);
    grade.push_back(grade_missing ? std::nullopt : std::optional<std::string>(level));
    char text[64];
    std::snprintf(text, sizeof text, "%.17g", yv);
    *csv += text;
    *csv += ",";
    if (!x_missing) {
      std::snprintf(text, sizeof text, "%.17g", xv);
      *csv += text;
    }
    *csv += "," + (grade_missing ? std::string() : level) + "\n";
  }
  columns->AddNumbers("y", y);
  columns->AddNumbers("x", x);
  columns->AddTexts("grade", grade);
  return columns;
}

std::string U64(std::uint64_t value) {
  std::string bytes;
  for (int shift = 0; shift < 64; shift += 8) bytes.push_back(static_cast<char>((value >> shift) & 0xFF));
  return bytes;
}

std::string Raw(const Sha256Digest& digest) { return std::string(reinterpret_cast<const char*>(digest.data()), digest.size()); }

TEST(ColumnScanTest, SameProfileSpillAndFactorAsTheCsv) {
  TempDir folder;
  std::string csv;
  const auto columns = MakeColumns(&csv);
  const std::filesystem::path file = folder.Write("data.csv", csv);
  ScanOptions options;
  options.work_dir = folder.path() / "work";
  std::filesystem::create_directories(options.work_dir);
  const ScanResult from_memory = ScanData(DataSet(std::static_pointer_cast<ColumnSource>(columns)), options);
  const ScanResult from_file = ScanData(file, options);
  EXPECT_TRUE(from_memory.in_memory);
  EXPECT_TRUE(from_memory.files.empty());
  EXPECT_EQ(from_memory.encoding, "memory");
  EXPECT_EQ(columns->last_done, 10000u);
  EXPECT_EQ(columns->last_total, 10000u);
  ASSERT_EQ(from_memory.header, from_file.header);
  ASSERT_EQ(from_memory.profile.rows, from_file.profile.rows);
  for (std::size_t c = 0; c < 3; ++c) {
    const ColumnProfile& a = from_memory.profile.columns[c];
    const ColumnProfile& b = from_file.profile.columns[c];
    EXPECT_EQ(a.kind, b.kind) << a.name;
    EXPECT_EQ(a.present, b.present) << a.name;
    EXPECT_EQ(a.missing, b.missing) << a.name;
    if (a.kind == ColumnKind::kNumeric) {
      EXPECT_EQ(a.min, b.min);
      EXPECT_EQ(a.max, b.max);
      EXPECT_EQ(a.mean, b.mean);  // same cells in the same order: the same Welford sums
      EXPECT_EQ(a.sd, b.sd);
    } else {
      ASSERT_EQ(a.levels.size(), b.levels.size());
      for (std::size_t l = 0; l < a.levels.size(); ++l) {
        EXPECT_EQ(a.levels[l].level, b.levels[l].level);
        EXPECT_EQ(a.levels[l].count, b.levels[l].count);
      }
    }
  }
  // The factor of y on x and grade from either spill: the same bits (same cells, same order).
  DesignSpec spec;
  spec.response = "y";
  TermSpec x_term;
  x_term.name = x_term.column = "x";
  TermSpec grade_term;
  grade_term.name = grade_term.column = "grade";
  grade_term.kind = TermKind::kCategorical;
  grade_term.baseline = "C";
  spec.terms = {x_term, grade_term};
  const Design design = BuildDesign(spec, from_file.profile);
  const PassResult a = RunFactorPass(*from_memory.spill, design, PassOptions{});
  const PassResult b = RunFactorPass(*from_file.spill, design, PassOptions{});
  EXPECT_EQ(a.accounting.rows_used, b.accounting.rows_used);
  EXPECT_EQ(a.accounting.rows_read, b.accounting.rows_read);
  ASSERT_EQ(a.factor.r.n_elem, b.factor.r.n_elem);
  for (std::size_t i = 0; i < a.factor.r.n_elem; ++i) EXPECT_EQ(a.factor.r(i), b.factor.r(i)) << i;
}

TEST(ColumnScanTest, FingerprintFollowsTheCanonicalForm) {
  auto columns = std::make_shared<VectorColumns>();
  columns->AddNumbers("price", {100.0, kNaN, -0.0});
  columns->AddTexts("grade", {std::string("A"), std::nullopt, std::string("\xC3\xA9")});
  // Written out by hand from engine/column_source.h.
  std::string price;
  for (double value : {100.0, 0.0, -0.0}) {
    std::uint64_t bits;
    std::memcpy(&bits, &value, 8);
    price += U64(std::isnan(value) ? 0x7FF8000000000000ULL : bits);
  }
  price.replace(8, 8, U64(0x7FF8000000000000ULL));  // the missing cell
  const std::string grade = U64(1) + "A" + U64(0xFFFFFFFFFFFFFFFFULL) + U64(2) + "\xC3\xA9";
  const std::string material = std::string("stepledger-columns-1\n") + U64(3) + U64(2) + U64(5) + "price" + "n" +
                               Raw(Sha256(price)) + U64(5) + "grade" + "t" + Raw(Sha256(grade));
  ScanOptions options;
  options.spill = false;
  const ScanResult scan = ScanData(DataSet(std::static_pointer_cast<ColumnSource>(columns)), options);
  EXPECT_EQ(scan.sha256, ToHex(Sha256(material)));
  EXPECT_EQ(scan.stored_bytes, price.size() + grade.size() + material.size());
  EXPECT_EQ(scan.spill, nullptr);
}

TEST(ColumnScanTest, ErrorsNameRowAndColumnAndLeaveNothing) {
  TempDir folder;
  ScanOptions options;
  options.work_dir = folder.path();
  auto infinite = std::make_shared<VectorColumns>();
  infinite->AddNumbers("y", {1, 2, 3});
  infinite->AddNumbers("x", {1, std::numeric_limits<double>::infinity(), 3});
  try {
    ScanData(DataSet(std::static_pointer_cast<ColumnSource>(infinite)), options);
    FAIL() << "no error";
  } catch (const LocatedInputError& error) {
    EXPECT_EQ(error.file(), "memory");
    EXPECT_EQ(error.line(), 2u);
    EXPECT_EQ(error.column(), 2u);
    EXPECT_NE(std::string(error.what()).find("memory:2:2: column 'x' holds inf"), std::string::npos) << error.what();
  }
  auto repeated = std::make_shared<VectorColumns>();
  repeated->AddNumbers("y", {1});
  repeated->AddNumbers("y", {2});
  EXPECT_THROW(ScanData(DataSet(std::static_pointer_cast<ColumnSource>(repeated)), options), InputError);
  auto bad_text = std::make_shared<VectorColumns>();
  bad_text->AddTexts("t", {std::string("ok"), std::string("\xFF")});
  EXPECT_THROW(ScanData(DataSet(std::static_pointer_cast<ColumnSource>(bad_text)), options), LocatedInputError);
  EXPECT_TRUE(std::filesystem::is_empty(folder.path()));
  EXPECT_THROW(DataSetFiles(DataSet(std::static_pointer_cast<ColumnSource>(bad_text))), InputError);
  EXPECT_EQ(DescribeDataSet(DataSet(std::static_pointer_cast<ColumnSource>(bad_text))), "memory");
}

}  // namespace
}  // namespace stepledger

// Tests of the profiling pass. Expected counts, levels, ranges, means and standard deviations
// are hand-computed from the small files below (common practice: sample sd with n-1), except
// where a check names Debian's python3-numpy as its source.

#include "stepledger/engine/profile.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <limits>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "support/test_paths.h"
#include "support/input_error.h"

namespace stepledger {
namespace {

using testing::TempDir;

constexpr double kEpsilon = std::numeric_limits<double>::epsilon();

std::vector<LevelCount> Levels(std::initializer_list<std::pair<const char*, std::uint64_t>> list) {
  std::vector<LevelCount> levels;
  for (const auto& [level, count] : list) levels.push_back({level, count});
  return levels;
}

void ExpectLevels(const ColumnProfile& column, const std::vector<LevelCount>& expected) {
  ASSERT_EQ(column.levels.size(), expected.size()) << "column " << column.name;
  for (std::size_t index = 0; index < expected.size(); ++index) {
    EXPECT_EQ(column.levels[index].level, expected[index].level) << "column " << column.name;
    EXPECT_EQ(column.levels[index].count, expected[index].count)
        << "column " << column.name << " level " << expected[index].level;
  }
}

void ExpectRelativelyNear(double actual, double expected, double relative_tolerance) {
  EXPECT_NEAR(actual, expected, relative_tolerance * std::abs(expected));
}

using testing::InputErrorOf;

class ProfileTest : public ::testing::Test {
 protected:
  TempDir folder_;
};

// Invented stock of a laptop reseller; each column exercises one kind.
constexpr std::string_view kStock =
    "model,age_months,price,grade,screen,notes,weight_kg\n"
    "A13,24,350,B,13.3,,1.2\n"
    "B7,36,NA,A,14,NA,1.5\n"
    "A13,12,420,A,15.6,,NA\n"
    "C2,48,280,b,twelve,,2.5\n"
    "B7,24,310,\xC3\xA9,14,,\n";

TEST_F(ProfileTest, KindsCountsRangesAndMomentsOfEachColumn) {
  const auto path = folder_.Write("stock.csv", std::string(kStock));
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  EXPECT_EQ(profile.path, path);
  EXPECT_EQ(profile.rows, 5u);
  ASSERT_EQ(profile.columns.size(), 7u);
  for (std::size_t index = 0; index < profile.columns.size(); ++index) {
    EXPECT_EQ(profile.columns[index].index, index);
  }

  const ColumnProfile& model = profile.columns[0];
  EXPECT_EQ(model.name, "model");
  EXPECT_EQ(model.kind, ColumnKind::kCategorical);
  EXPECT_EQ(model.present, 5u);
  EXPECT_EQ(model.missing, 0u);
  EXPECT_EQ(model.numeric_cells, 0u);
  EXPECT_TRUE(std::isnan(model.min) && std::isnan(model.max) && std::isnan(model.mean) &&
              std::isnan(model.sd));
  ExpectLevels(model, Levels({{"A13", 2}, {"B7", 2}, {"C2", 1}}));
  ASSERT_TRUE(model.first_text.has_value());
  EXPECT_EQ(model.first_text->line, 2u);
  EXPECT_EQ(model.first_text->column, 1u);
  EXPECT_EQ(model.first_text->text, "A13");
  EXPECT_FALSE(model.too_many_levels);

  // 24, 36, 12, 48, 24: mean 144/5 = 28.8; squared deviations sum to 748.8; sd = sqrt(748.8/4).
  const ColumnProfile& age = profile.columns[1];
  EXPECT_EQ(age.kind, ColumnKind::kNumeric);
  EXPECT_EQ(age.present, 5u);
  EXPECT_EQ(age.numeric_cells, 5u);
  EXPECT_EQ(age.min, 12.0);
  EXPECT_EQ(age.max, 48.0);
  ExpectRelativelyNear(age.mean, 28.8, 4 * kEpsilon);
  ExpectRelativelyNear(age.sd, std::sqrt(187.2), 8 * kEpsilon);
  ExpectLevels(age, Levels({{"12", 1}, {"24", 2}, {"36", 1}, {"48", 1}}));
  EXPECT_FALSE(age.first_text.has_value());

  // 350, 420, 280, 310 (one NA): mean 340; squared deviations 100+6400+3600+900 = 11000.
  const ColumnProfile& price = profile.columns[2];
  EXPECT_EQ(price.kind, ColumnKind::kNumeric);
  EXPECT_EQ(price.present, 4u);
  EXPECT_EQ(price.missing, 1u);
  EXPECT_EQ(price.min, 280.0);
  EXPECT_EQ(price.max, 420.0);
  ExpectRelativelyNear(price.mean, 340.0, 4 * kEpsilon);
  ExpectRelativelyNear(price.sd, std::sqrt(11000.0 / 3.0), 8 * kEpsilon);

  // Byte-wise order: 'A' (41) < 'B' (42) < 'b' (62) < "é" (C3 A9).
  const ColumnProfile& grade = profile.columns[3];
  EXPECT_EQ(grade.kind, ColumnKind::kCategorical);
  ExpectLevels(grade, Levels({{"A", 2}, {"B", 1}, {"b", 1}, {"\xC3\xA9", 1}}));
  ASSERT_TRUE(grade.first_text.has_value());
  EXPECT_EQ(grade.first_text->line, 2u);
  EXPECT_EQ(grade.first_text->column, 12u);
  EXPECT_EQ(grade.first_text->text, "B");

  // Numbers with one text cell: categorical, and the text cell is located exactly.
  const ColumnProfile& screen = profile.columns[4];
  EXPECT_EQ(screen.kind, ColumnKind::kCategorical);
  EXPECT_EQ(screen.present, 5u);
  EXPECT_EQ(screen.numeric_cells, 4u);
  EXPECT_TRUE(std::isnan(screen.mean));
  ASSERT_TRUE(screen.first_text.has_value());
  EXPECT_EQ(screen.first_text->line, 5u);
  EXPECT_EQ(screen.first_text->column, 13u);
  EXPECT_EQ(screen.first_text->text, "twelve");
  ExpectLevels(screen, Levels({{"13.3", 1}, {"14", 2}, {"15.6", 1}, {"twelve", 1}}));

  const ColumnProfile& notes = profile.columns[5];
  EXPECT_EQ(notes.kind, ColumnKind::kEmpty);
  EXPECT_EQ(notes.present, 0u);
  EXPECT_EQ(notes.missing, 5u);
  EXPECT_TRUE(notes.levels.empty());
  EXPECT_TRUE(std::isnan(notes.mean) && std::isnan(notes.sd));
  EXPECT_FALSE(notes.first_text.has_value());

  // 6/5, 3/2, 5/2 (NA and an empty last field missing): mean 26/15, sample variance 139/300.
  const ColumnProfile& weight = profile.columns[6];
  EXPECT_EQ(weight.kind, ColumnKind::kNumeric);
  EXPECT_EQ(weight.present, 3u);
  EXPECT_EQ(weight.missing, 2u);
  EXPECT_EQ(weight.min, 1.2);
  EXPECT_EQ(weight.max, 2.5);
  ExpectRelativelyNear(weight.mean, 26.0 / 15.0, 4 * kEpsilon);
  ExpectRelativelyNear(weight.sd, std::sqrt(139.0 / 300.0), 16 * kEpsilon);

  EXPECT_EQ(profile.Find("grade"), &profile.columns[3]);
  EXPECT_EQ(profile.Find("Grade"), nullptr);
}

TEST_F(ProfileTest, KindNames) {
  EXPECT_STREQ(ToString(ColumnKind::kNumeric), "numeric");
  EXPECT_STREQ(ToString(ColumnKind::kCategorical), "categorical");
  EXPECT_STREQ(ToString(ColumnKind::kEmpty), "empty");
}

TEST_F(ProfileTest, OnePresentNumberHasNoStandardDeviation) {
  const auto path = folder_.Write("single.csv", "x\n7.5\nNA\n");
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  const ColumnProfile& x = profile.columns[0];
  EXPECT_EQ(x.kind, ColumnKind::kNumeric);
  EXPECT_EQ(x.mean, 7.5);
  EXPECT_EQ(x.min, 7.5);
  EXPECT_EQ(x.max, 7.5);
  EXPECT_TRUE(std::isnan(x.sd));
}

TEST_F(ProfileTest, WelfordKeepsPrecisionFarFromZero) {
  // 1e9 + {4, 7, 13, 16}: mean 1e9 + 10, sample variance 90/3 = 30 (hand-computed). The
  // textbook one-pass sum-of-squares formula loses every digit here (x^2 ~ 1e18).
  const auto path = folder_.Write("offset.csv", "x\n1000000004\n1000000007\n1000000013\n1000000016\n");
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  const ColumnProfile& x = profile.columns[0];
  EXPECT_EQ(x.mean, 1000000010.0);
  ExpectRelativelyNear(x.sd, std::sqrt(30.0), 1e-9);
}

TEST_F(ProfileTest, NonFiniteCellIsAnErrorInAnyColumn) {
  const auto numeric = folder_.Write("inf.csv", "a,b\n1,2\n3,inf\n");
  EXPECT_EQ(InputErrorOf([&] { ProfileCsv(numeric, CsvOptions{}); }),
            numeric.string() + ":3:3: column 'b' holds 'inf', which is not a finite number");
  const auto text = folder_.Write("nan.csv", "name,x\nalpha,1\n\"NaN\",2\n");
  EXPECT_EQ(InputErrorOf([&] { ProfileCsv(text, CsvOptions{}); }),
            text.string() + ":3:1: column 'name' holds 'NaN', which is not a finite number");
  const auto huge = folder_.Write("huge.csv", "x\n1e400\n");
  EXPECT_EQ(InputErrorOf([&] { ProfileCsv(huge, CsvOptions{}); }),
            huge.string() + ":2:1: column 'x' holds '1e400', which is not a finite number");
}

TEST_F(ProfileTest, ReaderErrorsPassThrough) {
  const auto path = folder_.Write("ragged.csv", "a,b\n1,2\n3\n");
  EXPECT_EQ(InputErrorOf([&] { ProfileCsv(path, CsvOptions{}); }),
            path.string() + ":3:1: expected 2 fields as in the header, found 1 in the record '3'");
}

TEST_F(ProfileTest, LevelLimit) {
  // C, A, B, A, D with a limit of 2: C and A are kept; B is the third distinct level, so the
  // column is marked and counting stops there (the second A is not counted).
  const auto path = folder_.Write("levels.csv", "grade,code\nC,1\nA,2\nB,3\nA,1\nD,2\n");
  ProfileOptions options;
  options.max_levels = 2;
  const DataProfile profile = ProfileCsv(path, CsvOptions{}, options);
  const ColumnProfile& grade = profile.columns[0];
  EXPECT_EQ(grade.kind, ColumnKind::kCategorical);
  EXPECT_TRUE(grade.too_many_levels);
  // Over the limit no levels are kept: a partial list would depend on how the file was cut.
  EXPECT_TRUE(grade.levels.empty());
  EXPECT_EQ(grade.level_limit, 2u);
  EXPECT_EQ(grade.present, 5u);
  // A numeric column over the limit keeps no levels and is not flagged.
  const ColumnProfile& code = profile.columns[1];
  EXPECT_EQ(code.kind, ColumnKind::kNumeric);
  EXPECT_FALSE(code.too_many_levels);
  EXPECT_TRUE(code.levels.empty());

  options.max_levels = 4;
  const DataProfile roomy = ProfileCsv(path, CsvOptions{}, options);
  EXPECT_FALSE(roomy.columns[0].too_many_levels);
  ExpectLevels(roomy.columns[0], Levels({{"A", 2}, {"B", 1}, {"C", 1}, {"D", 1}}));
  ExpectLevels(roomy.columns[1], Levels({{"1", 2}, {"2", 2}, {"3", 1}}));
}

TEST_F(ProfileTest, SemicolonDelimiterAndCustomMissingTokens) {
  const auto path = folder_.Write("semicolon.csv", "price;grade;note\n10;A;x\n-;B;\n30;-;n/a\n");
  CsvOptions csv;
  csv.delimiter = ';';
  csv.missing_tokens = {"-", "n/a"};
  const DataProfile profile = ProfileCsv(path, csv);
  const ColumnProfile& price = profile.columns[0];
  EXPECT_EQ(price.kind, ColumnKind::kNumeric);
  EXPECT_EQ(price.present, 2u);
  EXPECT_EQ(price.missing, 1u);
  EXPECT_EQ(price.mean, 20.0);
  const ColumnProfile& grade = profile.columns[1];
  EXPECT_EQ(grade.missing, 1u);
  ExpectLevels(grade, Levels({{"A", 1}, {"B", 1}}));
  // The empty cell is not a missing token here, so it is a (text) level.
  const ColumnProfile& note = profile.columns[2];
  EXPECT_EQ(note.present, 2u);
  EXPECT_EQ(note.missing, 1u);
  ExpectLevels(note, Levels({{"", 1}, {"x", 1}}));
  ASSERT_TRUE(note.first_text.has_value());
  EXPECT_EQ(note.first_text->line, 2u);
  EXPECT_EQ(note.first_text->column, 6u);
}

TEST_F(ProfileTest, SmallBlocksGiveTheSameProfile) {
  const auto path = folder_.Write("stock.csv", std::string(kStock));
  const DataProfile reference = ProfileCsv(path, CsvOptions{});
  for (std::size_t block_bytes : {1, 2, 3, 7, 13}) {
    CsvOptions csv;
    csv.block_bytes = block_bytes;
    const DataProfile profile = ProfileCsv(path, csv);
    ASSERT_EQ(profile.columns.size(), reference.columns.size());
    for (std::size_t index = 0; index < profile.columns.size(); ++index) {
      const ColumnProfile& a = profile.columns[index];
      const ColumnProfile& b = reference.columns[index];
      EXPECT_EQ(a.kind, b.kind);
      EXPECT_EQ(a.present, b.present);
      EXPECT_EQ(a.missing, b.missing);
      EXPECT_EQ(a.levels.size(), b.levels.size());
      EXPECT_EQ(a.first_text.has_value(), b.first_text.has_value());
      if (a.first_text && b.first_text) {
        EXPECT_EQ(a.first_text->line, b.first_text->line);
        EXPECT_EQ(a.first_text->column, b.first_text->column);
      }
    }
  }
}

// Runs Debian's python3 with numpy on the file and returns mean, sd, min and max as it prints
// them (repr of a float64 round-trips exactly).
std::vector<double> NumpyMoments(const std::filesystem::path& file) {
  const std::string command = "'" + testing::ReferencePython() +
                              "' -c 'import sys, numpy; x = numpy.loadtxt(sys.argv[1], skiprows=1); "
                              "print(repr(float(x.mean())), repr(float(x.std(ddof=1))), repr(float(x.min())), "
                              "repr(float(x.max())))' '" + file.string() + "'";
  std::string output;
  if (testing::RunCommand(command, &output) != 0) return {};
  std::istringstream in(output);
  std::vector<double> values;
  for (double value; in >> value;) values.push_back(value);
  return values;
}

TEST_F(ProfileTest, MomentsAgreeWithNumpy) {
  if (!testing::PythonHasModules("numpy")) {
    GTEST_SKIP() << "Debian python3-numpy is not importable by " << testing::ReferencePython();
  }
  std::mt19937_64 generator(20261201);
  std::lognormal_distribution<double> price(6.0, 0.4);
  std::string text = "price\n";
  char number[40];
  for (int row = 0; row < 2000; ++row) {
    std::snprintf(number, sizeof number, "%.17g\n", price(generator));
    text += number;
  }
  const auto path = folder_.Write("prices.csv", text);
  const std::vector<double> numpy = NumpyMoments(path);
  ASSERT_EQ(numpy.size(), 4u) << "numpy printed no moments";
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  const ColumnProfile& column = profile.columns[0];
  // Source: Debian python3-numpy, numpy.mean and numpy.std(ddof=1). Both sum in a different
  // order than Welford's update, so agreement is to about 12 digits, not to the last bit.
  ExpectRelativelyNear(column.mean, numpy[0], 1e-12);
  ExpectRelativelyNear(column.sd, numpy[1], 1e-11);
  EXPECT_EQ(column.min, numpy[2]);
  EXPECT_EQ(column.max, numpy[3]);
}

// The rule of "terms": "all" (common practice: an identifier or a many-level code is no term).
TEST(ReasonNotACandidateTerm, IdentifiersSingleLevelsAndOverLimitCategoricalsAreLeftOut) {
  ColumnProfile column;
  column.name = "c";
  column.kind = ColumnKind::kCategorical;
  column.present = 4;
  column.levels = {{"a", 1}, {"b", 1}, {"c", 1}, {"d", 1}};
  EXPECT_EQ(ReasonNotACandidateTerm(column, 100), "every value distinct (4 values): looks like an identifier");
  column.present = 8;
  column.levels = {{"a", 2}, {"b", 2}, {"c", 2}, {"d", 2}};
  EXPECT_EQ(ReasonNotACandidateTerm(column, 100), std::nullopt);
  EXPECT_NE(ReasonNotACandidateTerm(column, 3).value_or("").find("4 levels, more than max_levels (3)"),
            std::string::npos);
  column.levels = {{"a", 8}};
  EXPECT_EQ(ReasonNotACandidateTerm(column, 100), "a single level carries no information");
  column.kind = ColumnKind::kNumeric;
  column.levels.clear();
  EXPECT_EQ(ReasonNotACandidateTerm(column, 2), std::nullopt) << "a numeric column is always usable";
  column.kind = ColumnKind::kEmpty;
  EXPECT_EQ(ReasonNotACandidateTerm(column, 100), "every cell is missing");
}

}  // namespace
}  // namespace stepledger

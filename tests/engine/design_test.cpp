// Term expansion: design columns, values, baselines, scales, row outcomes and the errors of
// BuildDesign and Design::Expand. Expected values are worked out by hand from the small CSV
// files below ("common practice": the usual treatment coding of categorical terms, k-1
// indicators against a baseline, and products of every pair of columns).

#include "stepledger/engine/design.h"

#include <chrono>
#include <cmath>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/limits.h"
#include "stepledger/engine/profile.h"
#include "support/input_error.h"
#include "support/test_paths.h"
#include "support/term_specs.h"

namespace stepledger {
namespace {

using testing::LimitErrorOf;
using testing::TempDir;

// grade: A 3 times, B twice, C once -> baseline A. colour: blue, red, green twice each -> tie,
// byte-wise smallest "blue". Row 3 misses age, row 4 has weight 0, row 5 misses the price.
constexpr const char* kLaptops =
    "price,age,disk,grade,colour,units,note,blank\n"
    "100,10,256,A,blue,1,x,NA\n"
    "200,20,512,B,red,2,y,NA\n"
    "150,,128,A,green,1,z,NA\n"
    "300,30,1024,C,red,0,w,NA\n"
    "NA,5,256,B,blue,1,v,NA\n"
    "250,40,512,A,green,3,u,NA\n";

using testing::Categorical;
using testing::Log;
using testing::Numeric;
using testing::Power;
using testing::Product;

// Key paths as the plan file parser sets them.
std::vector<TermSpec> Keyed(std::vector<TermSpec> terms) {
  for (std::size_t i = 0; i < terms.size(); ++i) terms[i].key_path = "terms[" + std::to_string(i) + "]";
  return terms;
}
DesignSpec WithKeyPaths(DesignSpec spec) {
  for (std::size_t i = 0; i < spec.terms.size(); ++i) {
    spec.terms[i].key_path = "terms[" + std::to_string(i) + "]";
  }
  return spec;
}

DesignSpec FullSpec() {
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  spec.terms = {Numeric("age", "age"),
                Power("age^2", "age", 2),
                Log("log_disk", "disk"),
                Numeric("disk", "disk"),
                Categorical("grade", "grade"),
                Categorical("colour", "colour"),
                Product("age:grade", "age", "grade"),
                Product("grade:colour", "grade", "colour"),
                Product("age:disk", "age", "disk")};
  return WithKeyPaths(spec);
}

struct ExpandedRow {
  RowOutcome outcome;
  std::uint64_t line = 0;
  std::vector<double> x;
  double y = 0, w = 0;
};

// "reason:column" of a dropped row ("missing:age", "zero weight:units"); "" for a used row.
std::string DropText(const RowOutcome& outcome) {
  if (outcome.used) return "";
  return std::string(ToString(outcome.reason)) + ":" + std::string(outcome.column);
}

std::vector<ExpandedRow> ExpandAll(const std::filesystem::path& path, const Design& design,
                                   const CsvOptions& csv = {}) {
  CsvReader reader(path, csv);
  CsvRecord record;
  std::vector<ExpandedRow> rows;
  while (reader.Next(record)) {
    ExpandedRow row;
    row.x.assign(design.column_count(), -99.0);
    row.outcome = design.Expand(reader, record, row.x, row.y, row.w);
    row.line = record.line;
    rows.push_back(std::move(row));
  }
  return rows;
}

// Runs f and returns the PlanError it throws (fails the test when it throws none).
template <typename F>
PlanError ExpectPlanError(F&& f) {
  try {
    f();
  } catch (const PlanError& error) {
    return error;
  }
  ADD_FAILURE() << "expected a PlanError";
  return PlanError("", "none");
}

template <typename F>
std::string ExpectInputError(F&& f) {
  try {
    f();
  } catch (const PlanError& error) {
    ADD_FAILURE() << "expected an InputError that is not a PlanError: " << error.what();
    return error.what();
  } catch (const InputError& error) {
    return error.what();
  }
  ADD_FAILURE() << "expected an InputError";
  return "";
}

class DesignTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = folder_.Write("laptops.csv", kLaptops);
    profile_ = ProfileCsv(path_, CsvOptions{});
  }
  Design Build(const DesignSpec& spec) const { return BuildDesign(spec, profile_); }
  PlanError BuildError(const DesignSpec& spec) const {
    return ExpectPlanError([&] { Build(spec); });
  }

  TempDir folder_;
  std::filesystem::path path_;
  DataProfile profile_;
};

TEST_F(DesignTest, ColumnNamesAndOrder) {
  const Design design = Build(FullSpec());
  const std::vector<std::string> expected = {
      "intercept",          "age",                "age^2",
      "log_disk",           "disk",               "grade=B",
      "grade=C",           "colour=green",      "colour=red",
      "age:grade=B",       "age:grade=C",       "grade=B:colour=green",
      "grade=B:colour=red", "grade=C:colour=green", "grade=C:colour=red",
      "age:disk"};
  ASSERT_EQ(design.column_count(), expected.size());
  for (std::size_t c = 0; c < expected.size(); ++c) EXPECT_EQ(design.columns[c].name, expected[c]);
  EXPECT_EQ(design.columns[0].term, kNoTerm);
  EXPECT_EQ(design.columns[5].term, 4u);

  const std::size_t grade_colour = design.FindTerm("grade:colour");
  ASSERT_EQ(grade_colour, 7u);
  EXPECT_EQ(design.terms[grade_colour].column_count, 4u);
  EXPECT_EQ(design.TermColumns(grade_colour), (std::vector<std::size_t>{11, 12, 13, 14}));
  EXPECT_EQ(design.FindTerm("nothing"), kNoTerm);
  EXPECT_EQ(design.terms[4].levels, (std::vector<std::string>{"B", "C"}));
}

TEST_F(DesignTest, DefaultBaselineIsMostFrequentThenBytewiseSmallest) {
  const Design design = Build(FullSpec());
  EXPECT_EQ(design.terms[design.FindTerm("grade")].baseline, "A");   // A 3, B 2, C 1
  EXPECT_EQ(design.terms[design.FindTerm("colour")].baseline, "blue");  // 2-2-2 tie
  EXPECT_EQ(design.terms[design.FindTerm("colour")].levels,
            (std::vector<std::string>{"green", "red"}));
}

TEST_F(DesignTest, GivenBaselineIsUsed) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Categorical("grade", "grade", "C")};
  const Design design = Build(WithKeyPaths(spec));
  EXPECT_EQ(design.terms[0].baseline, "C");
  EXPECT_EQ(design.columns[1].name, "grade=A");
  EXPECT_EQ(design.columns[2].name, "grade=B");
}

TEST_F(DesignTest, CategoricalOnNumericCodesUsesBytewiseLevelOrder) {
  // age texts 10, 20, 30, 5, 40 each once: byte-wise order 10 < 20 < 30 < 40 < 5, and the
  // tie of counts goes to "10".
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Categorical("age_group", "age")};
  const Design design = Build(WithKeyPaths(spec));
  EXPECT_EQ(design.terms[0].baseline, "10");
  EXPECT_EQ(design.terms[0].levels, (std::vector<std::string>{"20", "30", "40", "5"}));
}

TEST_F(DesignTest, ValuesOfEveryTermKind) {
  const Design design = Build(FullSpec());
  const auto rows = ExpandAll(path_, design);
  ASSERT_EQ(rows.size(), 6u);
  // Row 1: age 10, disk 256, grade A (baseline), colour blue (baseline), weight 1.
  const std::vector<double> row1 = {1, 10, 100, std::log(256.0), 256, 0, 0, 0, 0,
                                    0, 0, 0, 0, 0, 0, 2560};
  // Row 2: age 20, disk 512, grade B, colour red, weight 2.
  const std::vector<double> row2 = {1, 20, 400, std::log(512.0), 512, 1, 0, 0, 1,
                                    20, 0, 0, 1, 0, 0, 10240};
  // Row 6: age 40, disk 512, grade A, colour green, weight 3.
  const std::vector<double> row6 = {1, 40, 1600, std::log(512.0), 512, 0, 0, 1, 0,
                                    0, 0, 0, 0, 0, 0, 20480};
  ASSERT_TRUE(rows[0].outcome.used);
  EXPECT_EQ(rows[0].x, row1);
  EXPECT_EQ(rows[0].y, 100);
  EXPECT_EQ(rows[0].w, 1);
  ASSERT_TRUE(rows[1].outcome.used);
  EXPECT_EQ(rows[1].x, row2);
  EXPECT_EQ(rows[1].y, 200);
  EXPECT_EQ(rows[1].w, 2);
  ASSERT_TRUE(rows[5].outcome.used);
  EXPECT_EQ(rows[5].x, row6);
  EXPECT_EQ(rows[5].w, 3);
  EXPECT_TRUE(rows[0].outcome.column.empty());
}

TEST_F(DesignTest, CategoricalTimesCategoricalVariesFirstPartSlowest) {
  // C x red (row 4) would be column grade=C:colour=red; with weights it is dropped, so
  // expand without weights to see it.
  DesignSpec spec = FullSpec();
  spec.weights.reset();
  const Design design = Build(spec);
  const auto rows = ExpandAll(path_, design);
  ASSERT_TRUE(rows[3].outcome.used);
  const std::size_t first = design.terms[design.FindTerm("grade:colour")].first_column;
  EXPECT_EQ(design.columns[first + 3].name, "grade=C:colour=red");
  EXPECT_EQ(rows[3].x[first + 0], 0);
  EXPECT_EQ(rows[3].x[first + 1], 0);
  EXPECT_EQ(rows[3].x[first + 2], 0);
  EXPECT_EQ(rows[3].x[first + 3], 1);
  EXPECT_EQ(rows[3].w, 1);  // no weights column: weight 1
}

TEST_F(DesignTest, RowsDroppedByFirstReason) {
  const Design design = Build(FullSpec());
  const auto rows = ExpandAll(path_, design);
  EXPECT_FALSE(rows[2].outcome.used);
  EXPECT_EQ(DropText(rows[2].outcome), "missing:age");
  EXPECT_FALSE(rows[3].outcome.used);
  EXPECT_EQ(DropText(rows[3].outcome), "zero weight:units");
  EXPECT_FALSE(rows[4].outcome.used);
  EXPECT_EQ(DropText(rows[4].outcome), "missing:price");
}

TEST_F(DesignTest, ResponseReasonComesBeforeWeightsAndTerms) {
  TempDir folder;
  const auto path = folder.Write("order.csv",
                                 "y,w,a,b\n"
                                 "NA,0,NA,NA\n"   // all missing: the response is named
                                 "1,0,NA,NA\n"    // then the zero weight
                                 "1,1,NA,NA\n"    // then the first term's column
                                 "1,1,2,NA\n"
                                 "2,1,3,4\n"
                                 "3,2,5,6\n");
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  DesignSpec spec;
  spec.response = "y";
  spec.weights = "w";
  spec.terms = Keyed({Numeric("a", "a"), Numeric("b", "b")});
  const Design design = BuildDesign(spec, profile);
  const auto rows = ExpandAll(path, design);
  EXPECT_EQ(DropText(rows[0].outcome), "missing:y");
  EXPECT_EQ(DropText(rows[1].outcome), "zero weight:w");
  EXPECT_EQ(DropText(rows[2].outcome), "missing:a");
  EXPECT_EQ(DropText(rows[3].outcome), "missing:b");
  EXPECT_TRUE(rows[4].outcome.used);
}

TEST_F(DesignTest, ResponseLogTransform) {
  DesignSpec spec;
  spec.response = "price";
  spec.response_transform = ResponseTransform::kLog;
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = Build(spec);
  const auto rows = ExpandAll(path_, design);
  EXPECT_DOUBLE_EQ(rows[0].y, std::log(100.0));
  // ln 300 = 5.70 -> 2^-3 (log2 5.70 = 2.51 rounds to 3).
  EXPECT_EQ(design.response_scale, std::ldexp(1.0, -3));
}

TEST_F(DesignTest, PowerHierarchyParts) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Numeric("age", "age"), Power("age^3", "age", 3), Power("age^2", "age", 2),
                Numeric("disk", "disk"), Product("age:disk", "age", "disk")};
  const Design design = Build(WithKeyPaths(spec));
  EXPECT_EQ(design.terms[1].parts, (std::vector<std::size_t>{0, 2}));
  EXPECT_EQ(design.terms[2].parts, (std::vector<std::size_t>{0}));
  EXPECT_EQ(design.terms[4].parts, (std::vector<std::size_t>{0, 3}));
  EXPECT_TRUE(design.terms[0].parts.empty());
  const auto rows = ExpandAll(path_, design);
  EXPECT_EQ(rows[0].x[2], 1000);  // 10^3
}

TEST_F(DesignTest, ProductMayComeBeforeItsParts) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Product("age:grade", "age", "grade"), Numeric("age", "age"),
                Categorical("grade", "grade")};
  const Design design = Build(WithKeyPaths(spec));
  EXPECT_EQ(design.columns[1].name, "age:grade=B");
  EXPECT_EQ(design.columns[3].name, "age");
  const auto rows = ExpandAll(path_, design);
  EXPECT_EQ(rows[1].x[1], 20);  // age 20, grade B
  EXPECT_EQ(rows[1].x[2], 0);
}

TEST_F(DesignTest, NoInterceptHasNoColumnZero) {
  DesignSpec spec;
  spec.response = "price";
  spec.intercept = false;
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = Build(spec);
  ASSERT_EQ(design.column_count(), 1u);
  EXPECT_EQ(design.columns[0].name, "age");
  EXPECT_EQ(ExpandAll(path_, design)[0].x[0], 10);
}

TEST_F(DesignTest, ScalesArePowersOfTwoFromTheProfileRanges) {
  const Design design = Build(FullSpec());
  const std::vector<double> scales = design.scales();
  ASSERT_EQ(scales.size(), design.column_count() + 1);
  for (double scale : scales) {
    int exponent = 0;
    EXPECT_EQ(std::frexp(scale, &exponent), 0.5) << scale;
  }
  // Bounds: age 40 (log2 5.32 -> 2^-5); age^2 1600 (10.64 -> 2^-11);
  // log disk max(ln 128, ln 1024) = 6.93 (2.79 -> 2^-3); disk 1024 (2^-10);
  // indicators 1; age:disk 40 * 1024 = 40960 (15.32 -> 2^-15); price 300 (8.23 -> 2^-8).
  EXPECT_EQ(scales[0], 1.0);
  EXPECT_EQ(scales[1], std::ldexp(1.0, -5));
  EXPECT_EQ(scales[2], std::ldexp(1.0, -11));
  EXPECT_EQ(scales[3], std::ldexp(1.0, -3));
  EXPECT_EQ(scales[4], std::ldexp(1.0, -10));
  EXPECT_EQ(scales[5], 1.0);
  EXPECT_EQ(scales[9], std::ldexp(1.0, -5));  // age x indicator: 40 * 1
  EXPECT_EQ(scales[15], std::ldexp(1.0, -15));
  EXPECT_EQ(scales.back(), std::ldexp(1.0, -8));
  EXPECT_EQ(Build(FullSpec()).scales(), scales);
}

// "note" has six distinct texts in six rows: an identifier (ReasonNotACandidateTerm), left out
// like the empty column.
TEST_F(DesignTest, AllTermsSkipsEmptyColumnsAndIdentifiersAndNamesTermsAfterColumns) {
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  spec.all_terms = true;
  const Design design = Build(spec);
  std::vector<std::string> names;
  for (const auto& term : design.terms) names.push_back(term.name);
  EXPECT_EQ(names, (std::vector<std::string>{"age", "disk", "grade", "colour"}));
  EXPECT_EQ(design.terms[2].kind, TermKind::kCategorical);
  EXPECT_EQ(design.terms[0].kind, TermKind::kNumeric);
  ASSERT_EQ(design.skipped.size(), 2u);
  EXPECT_EQ(design.skipped[0].first, "note");
  EXPECT_EQ(design.skipped[0].second, "every value distinct (6 values): looks like an identifier");
  EXPECT_EQ(design.skipped[1].first, "blank");
}

// ---- BuildDesign errors: key path and message ----

TEST_F(DesignTest, UnknownColumnNamesTheKeyAndCloseNames) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Numeric("age", "agee")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[0].column");
  EXPECT_NE(std::string(error.what()).find("no column named 'agee'"), std::string::npos) << error.what();
  EXPECT_NE(std::string(error.what()).find("'age'"), std::string::npos) << error.what();

  DesignSpec unknown_response = spec;
  unknown_response.response = "prise";
  unknown_response.terms[0].column = "age";
  const PlanError response_error = BuildError(unknown_response);
  EXPECT_EQ(response_error.key_path(), "response");
  EXPECT_NE(std::string(response_error.what()).find("'price'"), std::string::npos);
}

TEST_F(DesignTest, CategoricalResponseNamesTheFirstTextCell) {
  DesignSpec spec;
  spec.response = "grade";
  spec.terms = Keyed({Numeric("age", "age")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "response");
  EXPECT_NE(std::string(error.what())
                .find("response 'grade' must be numeric, but " + path_.string() + ":2:12 holds 'A'"),
            std::string::npos)
      << error.what();
}

TEST_F(DesignTest, EmptyResponseIsRefused) {
  DesignSpec spec;
  spec.response = "blank";
  spec.terms = Keyed({Numeric("age", "age")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "response");
  EXPECT_NE(std::string(error.what()).find("no values"), std::string::npos) << error.what();
}

TEST_F(DesignTest, WeightsMustBeNumeric) {
  DesignSpec spec = FullSpec();
  spec.weights = "colour";
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "weights");
  EXPECT_NE(std::string(error.what()).find("weights 'colour' must be numeric, but " +
                                           path_.string() + ":2:14 holds 'blue'"),
            std::string::npos)
      << error.what();
}

TEST_F(DesignTest, NumericKindsOnTextColumnsAreRefused) {
  struct Case {
    TermSpec term;
    std::string key;
    std::string text;
  };
  const std::vector<Case> cases = {
      {Numeric("g", "grade"), "terms[0].column", "write \"categorical\": \"grade\""},
      {Power("g2", "grade", 2), "terms[0].power.column", ":2:12 holds 'A'"},
      {Log("lg", "colour"), "terms[0].log", ":2:14 holds 'blue'"},
  };
  for (const auto& c : cases) {
    DesignSpec spec;
    spec.response = "price";
    spec.terms = Keyed({c.term});
    const PlanError error = BuildError(spec);
    EXPECT_EQ(error.key_path(), c.key);
    EXPECT_NE(std::string(error.what()).find(c.text), std::string::npos) << error.what();
  }
}

TEST_F(DesignTest, BaselineNotALevelListsTheLevels) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Categorical("grade", "grade", "D")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[0].baseline");
  EXPECT_NE(std::string(error.what()).find("(levels: 'A', 'B', 'C')"), std::string::npos)
      << error.what();
}

TEST_F(DesignTest, ProductErrors) {
  DesignSpec unknown_part;
  unknown_part.response = "price";
  unknown_part.terms = Keyed({Numeric("age", "age"), Product("p", "age", "disk")});
  PlanError error = BuildError(unknown_part);
  EXPECT_EQ(error.key_path(), "terms[1].product[1]");
  EXPECT_NE(std::string(error.what()).find("no term named 'disk'"), std::string::npos);

  DesignSpec with_itself;
  with_itself.response = "price";
  with_itself.terms = Keyed({Numeric("age", "age"), Product("p", "age", "age")});
  error = BuildError(with_itself);
  EXPECT_EQ(error.key_path(), "terms[1].product");
  EXPECT_NE(std::string(error.what()).find("with itself"), std::string::npos);

  DesignSpec cycle;
  cycle.response = "price";
  cycle.terms = Keyed({Numeric("age", "age"), Product("p", "age", "q"),
                                        Product("q", "p", "age")});
  error = BuildError(cycle);
  EXPECT_NE(std::string(error.what()).find("cycle: 'p' -> 'q' -> 'p'"), std::string::npos)
      << error.what();
  EXPECT_EQ(error.key_path(), "terms[1].product");
}

TEST_F(DesignTest, DuplicateTermNamesNameBothPlaces) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Numeric("age", "age"), Numeric("age", "disk")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[1].name");
  EXPECT_NE(std::string(error.what()).find("also terms[0].name"), std::string::npos);
}

TEST_F(DesignTest, TermOnTheResponseIsRefused) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Log("lp", "price")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[0].log");
  EXPECT_NE(std::string(error.what()).find("uses the response column"), std::string::npos);
}

TEST_F(DesignTest, TooManyLevelsIsRefused) {
  // The scan kept 3 levels per column (the levels limit); "note" has 6. The plan's max_levels
  // (2) is the lower rule, so the plan is what to change: a PlanError at the term's key.
  ProfileOptions options;
  options.max_levels = 3;
  const DataProfile profile = ProfileCsv(path_, CsvOptions{}, options);
  DesignSpec spec;
  spec.response = "price";
  spec.max_levels = 2;
  spec.terms = Keyed({Categorical("note", "note")});
  const PlanError error = ExpectPlanError([&] { BuildDesign(spec, profile); });
  EXPECT_EQ(error.key_path(), "terms[0].categorical");
  EXPECT_NE(std::string(error.what()).find("column 'note' has more than 3 distinct levels, more than max_levels (2)"),
            std::string::npos)
      << error.what();
}

TEST_F(DesignTest, ColumnPastTheLevelsLimitIsALimitErrorWhenTheLimitIsTheLowerRule) {
  // max_levels 100 (default) is above the 3 levels the scan kept: raising max_levels cannot
  // help, the levels limit must be raised (or the column left out).
  ProfileOptions options;
  options.max_levels = 3;
  const DataProfile profile = ProfileCsv(path_, CsvOptions{}, options);
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Numeric("age", "age"), Categorical("note", "note")});
  try {
    BuildDesign(spec, profile);
    ADD_FAILURE() << "expected a LimitError";
  } catch (const LimitError& error) {
    EXPECT_EQ(error.limit(), LimitKind::kLevels);
    EXPECT_EQ(error.value(), 3u);
    EXPECT_NE(std::string(error.what()).find("plan key 'terms[1].categorical': column 'note' has more than 3 "
                                             "distinct levels"),
              std::string::npos)
        << error.what();
    EXPECT_NE(std::string(error.what()).find("the levels limit is 3"), std::string::npos) << error.what();
  }
}

TEST_F(DesignTest, PowerDegreeOutsideTwoToTwelveIsRefused) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Power("a1", "age", 1)});
  PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[0].power.degree");
  EXPECT_NE(std::string(error.what()).find("expected an integer from 2 to 12, found 1"), std::string::npos);
  // A degree of 2^31 - 1 would take that many products per row: refused before any row.
  spec.terms = Keyed({Numeric("age", "age"), Power("huge", "age", 2147483647)});
  error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[1].power.degree");
  EXPECT_NE(std::string(error.what()).find("from 2 to 12, found 2147483647"), std::string::npos) << error.what();
  spec.terms = Keyed({Power("a13", "age", 13)});
  EXPECT_EQ(BuildError(spec).key_path(), "terms[0].power.degree");
  // 12 is allowed (kMaxPowerDegree).
  spec.terms = Keyed({Power("a12", "age", kMaxPowerDegree)});
  EXPECT_EQ(Build(spec).terms.at(0).degree, 12);
}

// ---- limits (engine/limits.h) ----

TEST_F(DesignTest, AllTermsAreCountedAgainstTheTermsLimitBeforeAnyIsBuilt) {
  // Usable columns besides the response: age, disk, grade, colour, units (note is an
  // identifier, blank is empty): 5.
  DesignSpec spec;
  spec.response = "price";
  spec.all_terms = true;
  InputLimits limits;
  limits.terms = 4;
  const LimitError error = LimitErrorOf([&] { BuildDesign(spec, profile_, limits); });
  EXPECT_EQ(error.limit(), LimitKind::kTerms);
  EXPECT_EQ(std::string(error.what()),
            "plan key 'terms': \"all\" makes 5 terms (the usable columns of '" + path_.string() +
                "' besides the response); the terms limit is 4; name the candidate terms in a plan instead");
  limits.terms = 5;
  EXPECT_EQ(BuildDesign(spec, profile_, limits).terms.size(), 5u);
}

TEST_F(DesignTest, ListedTermsAreCountedAgainstTheTermsLimit) {
  DesignSpec spec = FullSpec();  // 9 terms
  InputLimits limits;
  limits.terms = 8;
  const LimitError error = LimitErrorOf([&] { BuildDesign(spec, profile_, limits); });
  EXPECT_EQ(std::string(error.what()), "plan key 'terms': the plan lists 9 terms; the terms limit is 8");
}

TEST_F(DesignTest, DesignColumnsLimitNamesTheTermThatCrossesItAndTheLargest) {
  // intercept 1 + grade 2 + colour 2 = 5; the product grade:colour adds 2 x 2 = 4.
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Categorical("grade", "grade"), Categorical("colour", "colour"),
                      Product("grade:colour", "grade", "colour")});
  InputLimits limits;
  limits.design_columns = 8;
  const LimitError error = LimitErrorOf([&] { BuildDesign(spec, profile_, limits); });
  EXPECT_EQ(error.limit(), LimitKind::kDesignColumns);
  EXPECT_EQ(std::string(error.what()),
            "plan key 'terms[2]': term 'grade:colour' makes 4 design columns, which brings the design to 9 "
            "(the largest terms so far: 'grade:colour' 4, 'grade' 2, 'colour' 2); the design-columns limit is "
            "8; leave out or narrow the largest terms (a product of two categorical terms has one column per "
            "pair of non-baseline levels), or group levels");
  limits.design_columns = 9;
  EXPECT_EQ(BuildDesign(spec, profile_, limits).column_count(), 9u);
}

TEST(DesignLimitsTest, CategoricalProductOf150By150LevelsIsRefusedBeforeItsColumnsExist) {
  // Two categorical columns of 150 levels each (every pair of rows distinct): their product
  // would have 149 x 149 = 22,201 columns, over the default design-columns limit (5,000).
  TempDir folder;
  std::string text = "price,dealer,model\n";
  for (int row = 0; row < 300; ++row) {
    text += std::to_string(100 + row) + ",D" + std::to_string(row % 150) + ",M" + std::to_string((row * 7) % 150) + "\n";
  }
  const auto path = folder.Write("pairs.csv", text);
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  DesignSpec spec;
  spec.response = "price";
  spec.max_levels = 150;
  spec.terms = Keyed({Categorical("dealer", "dealer"), Categorical("model", "model"),
                      Product("dealer:model", "dealer", "model")});
  const auto started = std::chrono::steady_clock::now();
  const LimitError error = LimitErrorOf([&] { BuildDesign(spec, profile); });
  EXPECT_LT(std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count(), 1.0);
  EXPECT_NE(std::string(error.what()).find("plan key 'terms[2]': term 'dealer:model' makes 22,201 design columns, "
                                           "which brings the design to 22,500"),
            std::string::npos)
      << error.what();
  EXPECT_NE(std::string(error.what()).find("the design-columns limit is 5,000"), std::string::npos);
}

TEST(DesignLimitsTest, LongChainsOfProductsNeedNoDeepRecursion) {
  // p1 = x:y, p2 = p1:z, p3 = p2:x... 200,000 deep: validation and the evaluation order walk
  // the chain on explicit stacks (a recursive walk would overflow the call stack).
  DesignSpec spec;
  spec.response = "price";
  spec.terms = {Numeric("x", "x"), Numeric("y", "y")};
  spec.terms.push_back(Product("p1", "x", "y"));
  for (int i = 2; i <= 200'000; ++i) {
    spec.terms.push_back(Product("p" + std::to_string(i), "p" + std::to_string(i - 1), i % 2 == 0 ? "x" : "y"));
  }
  EXPECT_NO_THROW(ValidateDesignSpec(spec));
  // A cycle at the end of the chain is still found and named.
  spec.terms[2].parts = {"p200000", "x"};
  try {
    ValidateDesignSpec(spec);
    ADD_FAILURE() << "expected a cycle";
  } catch (const PlanError& error) {
    EXPECT_NE(std::string(error.what()).find("products form a cycle: 'p1' -> 'p200000' -> "), std::string::npos)
        << std::string(error.what()).substr(0, 200);
  }
}

TEST_F(DesignTest, ClashingColumnNamesAreRefused) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Categorical("grade", "grade"), Numeric("grade=B", "age")});
  const PlanError error = BuildError(spec);
  EXPECT_EQ(error.key_path(), "terms[1].name");
  EXPECT_NE(std::string(error.what()).find("same name"), std::string::npos);
}

// ---- Expand errors: file:line:column ----

TEST(DesignExpandTest, NegativeWeightNamesTheCell) {
  TempDir folder;
  const auto path = folder.Write("w.csv",
                                 "price,age,disk,grade,colour,units\n"
                                 "100,10,256,A,blue,1\n"
                                 "200,20,512,B,red,-2\n");
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
  const std::string message = ExpectInputError([&] { ExpandAll(path, design); });
  EXPECT_NE(message.find(path.string() + ":3:18"), std::string::npos) << message;
  EXPECT_NE(message.find("negative"), std::string::npos) << message;
}

TEST(DesignExpandTest, LogOfNonPositiveResponseNamesTheRow) {
  TempDir folder;
  const auto path = folder.Write("y.csv", "price,age\n100,1\n0,2\n50,3\n");
  DesignSpec spec;
  spec.response = "price";
  spec.response_transform = ResponseTransform::kLog;
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
  const std::string message = ExpectInputError([&] { ExpandAll(path, design); });
  EXPECT_NE(message.find(path.string() + ":3:1"), std::string::npos) << message;
  EXPECT_NE(message.find("data row 2"), std::string::npos) << message;
}

TEST(DesignExpandTest, LogTermOfNonPositiveValueNamesTheCell) {
  TempDir folder;
  const auto path = folder.Write("l.csv", "price,disk\n100,256\n90,-1\n");
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Log("log_disk", "disk")});
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
  const std::string message = ExpectInputError([&] { ExpandAll(path, design); });
  EXPECT_NE(message.find(path.string() + ":3:4"), std::string::npos) << message;
  EXPECT_NE(message.find("found '-1'"), std::string::npos) << message;
}

TEST(DesignExpandTest, UnseenLevelAndTextInNumericColumnAreErrors) {
  // The design comes from one file and meets another with the same header: the profile has
  // not seen these cells.
  TempDir folder;
  const auto profiled = folder.Write("a.csv", "price,age,grade\n1,2,A\n2,3,B\n");
  const auto changed_level = folder.Write("b.csv", "price,age,grade\n1,2,A\n2,3,Z\n");
  const auto changed_number = folder.Write("c.csv", "price,age,grade\n1,2,A\n2,old,B\n");
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Numeric("age", "age"), Categorical("grade", "grade")});
  const Design design = BuildDesign(spec, ProfileCsv(profiled, CsvOptions{}));
  std::string message = ExpectInputError([&] { ExpandAll(changed_level, design); });
  EXPECT_NE(message.find(changed_level.string() + ":3:5"), std::string::npos) << message;
  EXPECT_NE(message.find("level 'Z'"), std::string::npos) << message;
  message = ExpectInputError([&] { ExpandAll(changed_number, design); });
  EXPECT_NE(message.find(changed_number.string() + ":3:3"), std::string::npos) << message;
  EXPECT_NE(message.find("'old'"), std::string::npos) << message;
}

TEST(DesignExpandTest, NonFiniteWeightNamesTheCell) {
  // The profile refuses non-finite cells, so the design comes from a file without one.
  TempDir folder;
  const auto profiled = folder.Write("a.csv", "price,age,units\n1,2,1\n2,3,1\n");
  const auto changed = folder.Write("b.csv", "price,age,units\n1,2,1\n2,3,inf\n");
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = BuildDesign(spec, ProfileCsv(profiled, CsvOptions{}));
  const std::string message = ExpectInputError([&] { ExpandAll(changed, design); });
  EXPECT_NE(message.find(changed.string() + ":3:5"), std::string::npos) << message;
  EXPECT_NE(message.find("non-finite number 'inf'"), std::string::npos) << message;
}

TEST(DesignExpandTest, HeaderMovedSinceProfileIsAnError) {
  TempDir folder;
  const auto profiled = folder.Write("a.csv", "price,age\n1,2\n2,3\n");
  const auto moved = folder.Write("b.csv", "age,price\n2,1\n3,2\n");
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Numeric("age", "age")});
  const Design design = BuildDesign(spec, ProfileCsv(profiled, CsvOptions{}));
  CsvReader reader(moved);
  const std::string message = ExpectInputError([&] { design.CheckHeader(reader); });
  EXPECT_NE(message.find("changed"), std::string::npos) << message;
}

TEST(DesignExpandTest, MissingTokensComeFromTheReader) {
  TempDir folder;
  const auto path = folder.Write("m.csv", "price,age\n1,-\n2,NA\n3,4\n4,5\n");
  CsvOptions csv;
  csv.missing_tokens = {"-"};
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed({Categorical("age", "age")});
  // With "-" as the only missing token, "NA" is a level of the categorical term.
  const Design design = BuildDesign(spec, ProfileCsv(path, csv));
  const auto rows = ExpandAll(path, design, csv);
  EXPECT_EQ(DropText(rows[0].outcome), "missing:age");
  EXPECT_TRUE(rows[1].outcome.used);
  EXPECT_EQ(design.terms[0].levels.size(), 2u);  // 3 levels "4", "5", "NA"
}

// ---- the magnitudes stepledger fits (design.h, kLargestMagnitude) ------------------------
// Beyond about 1e154 a square overflows and below about 1e-154 it underflows; the window keeps
// the numbers reported in the data's units (sums of squares, variances, covariances: products
// and ratios of two such magnitudes) far inside the doubles' range. Values are common practice.

DesignSpec AgeSpec(std::vector<TermSpec> terms) {
  DesignSpec spec;
  spec.response = "price";
  spec.terms = Keyed(std::move(terms));
  return spec;
}

std::string BuildMessage(const std::string& csv, const DesignSpec& spec) {
  TempDir folder;
  const auto path = folder.Write("m.csv", csv);
  return ExpectInputError([&] { BuildDesign(spec, ProfileCsv(path, CsvOptions{})); });
}

TEST(DesignMagnitudeTest, TheWindowsEdgesAreFitted) {
  TempDir folder;
  // 1e60 and 1e-60 themselves, a zero column, and a column whose largest value is 1 though it
  // holds a subnormal number: only the largest magnitude of a column matters.
  const auto path = folder.Write("edges.csv",
                                 "price,big,small,zero,mixed\n"
                                 "1e60,-1e60,1e-60,0,1\n"
                                 "2e59,3,-1e-61,0,4e-320\n"
                                 "3e59,4,2e-61,0,0.5\n");
  const Design design = BuildDesign(
      AgeSpec({Numeric("big", "big"), Numeric("small", "small"), Numeric("zero", "zero"), Numeric("mixed", "mixed")}),
      ProfileCsv(path, CsvOptions{}));
  EXPECT_EQ(design.columns[1].bound, 1e60);
  EXPECT_EQ(design.columns[2].bound, 1e-60);
  EXPECT_EQ(design.columns[3].bound, 0.0);
  EXPECT_EQ(design.columns[4].bound, 1.0);
}

TEST(DesignMagnitudeTest, ATooLargeColumnNamesTheCellTheValueAndTheRescaling) {
  // The largest magnitude is negative here: -2.5e160 on line 3, column 3.
  const std::string message =
      BuildMessage("price,age\n1,2e100\n2,-2.5e160\n3,1e160\n", AgeSpec({Numeric("age", "age")}));
  EXPECT_NE(message.find("m.csv:3:3: column 'age' holds -2.5e+160 beyond the magnitudes stepledger fits"),
            std::string::npos)
      << message;
  EXPECT_NE(message.find("between 1e-60 and 1e+60"), std::string::npos) << message;
  EXPECT_NE(message.find("divide it by 1e+160"), std::string::npos) << message;
}

TEST(DesignMagnitudeTest, ATinyColumnSaysToMultiply) {
  // Every value subnormal: 4e-320 is the largest magnitude (line 3).
  const std::string message =
      BuildMessage("price,age\n1,1e-321\n2,4e-320\n3,-3e-320\n", AgeSpec({Numeric("age", "age")}));
  EXPECT_NE(message.find("m.csv:3:3: column 'age' holds 4e-320, its largest value in magnitude, below"),
            std::string::npos)
      << message;
  EXPECT_NE(message.find("multiply it by 1e+320"), std::string::npos) << message;
}

TEST(DesignMagnitudeTest, TheResponseAndTheWeightsAreCheckedFirst) {
  DesignSpec spec = AgeSpec({Numeric("age", "age")});
  std::string message = BuildMessage("price,age,w\n1e61,1e300,1\n2,3,1\n", spec);
  EXPECT_NE(message.find("m.csv:2:1: response 'price' holds 1e+61"), std::string::npos) << message;
  spec.weights = "w";
  message = BuildMessage("price,age,w\n1,1e300,1e-70\n2,3,0\n", spec);
  EXPECT_NE(message.find("m.csv:2:9: weights column 'w' holds 1e-70"), std::string::npos) << message;
  // Under "log" the response is ln(price), at most 745 in magnitude: never refused.
  spec.weights.reset();
  spec.response_transform = ResponseTransform::kLog;
  TempDir folder;
  const auto path = folder.Write("log.csv", "price,age\n1e300,1\n1e-300,2\n");
  EXPECT_NO_THROW(BuildDesign(spec, ProfileCsv(path, CsvOptions{})));
}

TEST(DesignMagnitudeTest, APowerAndAProductNameTheirTerm) {
  TempDir folder;
  const auto path = folder.Write("p.csv", "price,age,disk\n1,1e25,1e40\n2,-2e24,3\n");
  const DataProfile profile = ProfileCsv(path, CsvOptions{});
  // (1e25)^3 = 1e75: the column passes, its cube does not.
  PlanError error = ExpectPlanError([&] {
    BuildDesign(AgeSpec({Numeric("age", "age"), Power("age3", "age", 3)}), profile);
  });
  EXPECT_EQ(error.key_path(), "terms[1]");
  EXPECT_NE(std::string(error.what()).find("power term 'age3' raises column 'age' to the power 3: its largest "
                                           "value 1e+25 (" + path.string() + ":2:3) becomes 1e+75"),
            std::string::npos)
      << error.what();
  // 1e25 * 1e40 = 1e65: both parts pass, their product does not.
  error = ExpectPlanError([&] {
    BuildDesign(AgeSpec({Product("age:disk", "age", "disk"), Numeric("age", "age"), Numeric("disk", "disk")}),
                profile);
  });
  EXPECT_EQ(error.key_path(), "terms[0]");
  EXPECT_NE(std::string(error.what()).find("product term 'age:disk' multiplies 'age' (up to 1e+25 from 1e+25 at " +
                                           path.string() + ":2:3) and 'disk' (up to 1e+40"),
            std::string::npos)
      << error.what();
  EXPECT_NE(std::string(error.what()).find("its values can reach 1e+65"), std::string::npos) << error.what();
  // A log term is never refused, and a power far past the doubles' range still says its size.
  EXPECT_NO_THROW(BuildDesign(AgeSpec({Log("log_age", "age")}), profile));
  error = ExpectPlanError([&] { BuildDesign(AgeSpec({Power("age13", "age", 13)}), profile); });
  EXPECT_NE(std::string(error.what()).find("expected an integer from 2 to 12, found 13"), std::string::npos)
      << error.what();
  error = ExpectPlanError([&] { BuildDesign(AgeSpec({Power("age12", "age", 12)}), profile); });
  EXPECT_NE(std::string(error.what()).find("becomes 1e+300"), std::string::npos) << error.what();
}

}  // namespace
}  // namespace stepledger

// The fold factors and the holdout of the factor pass (engine/data_pass.h: PassOptions::folds and
// ::holdout) against a reference built by this test from the rows it wrote.
//
// Sources:
//  - The assignment formulas are written out here once more, apart from engine/resampling.h:
//    fold(i) = SplitMix64(seed + (i + 1) * 0x9E3779B97F4A7C15) mod k and held out when that hash
//    divided by 2^64 is below the fraction, SplitMix64 being the finaliser of Steele, Lea and
//    Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014 (its constants from
//    memory; tests/engine/cross_validation_test.cpp checks them against the generator's known
//    outputs). The holdout test is an exact integer comparison, with no floating point.
//  - The reference factor of a fold is a Householder QR (LAPACK dgeqrf through Armadillo's
//    qr_econ) of the fold's rows, weighted by sqrt(w) and scaled by the pass's power-of-two
//    scales; R'R is compared, which is unique whatever the signs of R's rows.
//  - Tolerances are common practice: QR of a well-conditioned matrix in another order of
//    operations agrees to a few hundred units of rounding (1e-10 leaves a wide margin);
//    merging in another order (threads, blocks) agrees to rounding (1e-13 of a column's norm).
// The data are invented: laptop resale prices with a known linear model, missing cells in a
// column the plan reads (rows dropped), missing cells in a column it does not read (rows kept),
// and zero weights in the weighted variant.

#include <gtest/gtest.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include <armadillo>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/profile.h"
#include "stepledger/engine/table_scan.h"
#include "support/factor_compare.h"
#include "support/term_specs.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

using testing::TempDir;
using testing::TestRandom;

// --- The formulas, written out independently ---------------------------------------------------

// SplitMix64's finaliser; unsigned arithmetic in C++ is modulo 2^64.
std::uint64_t Finalise(std::uint64_t z) {
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

std::uint64_t HashOfRecord(std::uint64_t seed, std::uint64_t record) {
  return Finalise(seed + (record + 1) * 0x9E3779B97F4A7C15ull);
}

std::size_t ExpectedFold(std::uint64_t seed, std::uint64_t record, std::size_t k) {
  return static_cast<std::size_t>(HashOfRecord(seed, record) % k);
}

// fraction * 2^64 as an integer: exact for a fraction in [2^-12, 1) (its 53-bit significand
// shifted left by at least 0 places), which the tests' fractions are.
std::uint64_t HoldoutThreshold(double fraction) {
  int exponent = 0;
  const double mantissa = std::frexp(fraction, &exponent);  // fraction = mantissa * 2^exponent
  const auto significand = static_cast<std::uint64_t>(std::ldexp(mantissa, 53));
  const int shift = exponent - 53 + 64;
  EXPECT_GE(shift, 0) << "fraction too small for the integer threshold";
  EXPECT_LT(shift, 64);
  return significand << shift;
}

bool ExpectedHeldOut(double fraction, std::uint64_t seed, std::uint64_t record) {
  return HashOfRecord(seed, record) < HoldoutThreshold(fraction);
}

// --- Invented data -------------------------------------------------------------------------------

// One data record as written: price = 900 - 9 age + 40 ram + 15 screen + 60 [grade A]
// - 35 [grade C] + 0.4 age*ram + noise (sd 20).
struct Record {
  double price = 0, age = 0, ram = 0, screen = 0, battery = 0, units = 1;
  std::string grade;
  bool price_missing = false, age_missing = false, battery_missing = false;
  bool Usable(bool weighted) const { return !price_missing && !age_missing && (!weighted || units > 0); }
};

struct Data {
  std::string text;
  std::vector<Record> records;
};

std::string Shortest(double value) {
  char text[32];
  const auto written = std::to_chars(text, text + sizeof text, value);
  return std::string(text, written.ptr);
}

Data MakeData(std::size_t rows, bool weighted, std::uint64_t seed) {
  TestRandom random(seed);
  const char* grades[] = {"A", "B", "C"};
  Data data;
  data.text = weighted ? "price,age,ram,screen,grade,battery,units\n" : "price,age,ram,screen,grade,battery\n";
  for (std::size_t i = 0; i < rows; ++i) {
    Record record;
    record.age = std::round(random.Uniform(3, 60));
    record.ram = 4 * std::floor(random.Uniform(1, 9));
    record.screen = std::round(random.Uniform(11.6, 17.3) * 10) / 10;
    record.grade = grades[std::min(2, static_cast<int>(random.Uniform(0, 3)))];
    record.battery = std::round(random.Uniform(40, 100));
    record.price = 900 - 9 * record.age + 40 * record.ram + 15 * record.screen +
                   (record.grade == "A" ? 60 : record.grade == "C" ? -35 : 0) + 0.4 * record.age * record.ram +
                   20 * random.Normal();
    record.units = weighted ? (random.Uniform(0, 1) < 0.03 ? 0.0 : std::round(random.Uniform(1, 6))) : 1.0;
    record.price_missing = random.Uniform(0, 1) < 0.02;
    record.age_missing = random.Uniform(0, 1) < 0.03;
    record.battery_missing = random.Uniform(0, 1) < 0.1;
    data.text += (record.price_missing ? std::string("NA") : Shortest(record.price)) + "," +
                 (record.age_missing ? std::string() : Shortest(record.age)) + "," + Shortest(record.ram) + "," +
                 Shortest(record.screen) + "," + record.grade + "," +
                 (record.battery_missing ? std::string() : Shortest(record.battery));
    if (weighted) data.text += "," + Shortest(record.units);
    data.text += "\n";
    data.records.push_back(record);
  }
  return data;
}

DesignSpec Spec(bool weighted) {
  DesignSpec spec;
  spec.response = "price";
  if (weighted) spec.weights = "units";
  spec.terms = {testing::Numeric("age", "age"), testing::Numeric("ram", "ram"),
                testing::Numeric("screen", "screen"),
                testing::Categorical("grade", "grade")};
  TermSpec product;
  product.name = "age:ram";
  product.kind = TermKind::kProduct;
  product.parts = {"age", "ram"};
  product.key_path = "terms[4]";
  spec.terms.push_back(product);
  return spec;
}

// The value of a design column for a record, from the column's name ("intercept", "age",
// "grade=A", "age:ram"): the test's own expansion, not the engine's.
double Part(const Record& record, const std::string& name) {
  if (name == "intercept") return 1;
  if (name == "age") return record.age;
  if (name == "ram") return record.ram;
  if (name == "screen") return record.screen;
  if (name.rfind("grade=", 0) == 0) return record.grade == name.substr(6) ? 1 : 0;
  ADD_FAILURE() << "unexpected design column " << name;
  return 0;
}

double ColumnValue(const Record& record, const std::string& name) {
  double value = 1;
  std::size_t start = 0;
  while (true) {
    const std::size_t colon = name.find(':', start);
    value *= Part(record, name.substr(start, colon == std::string::npos ? std::string::npos : colon - start));
    if (colon == std::string::npos) return value;
    start = colon + 1;
  }
}

// Which records a reference factor takes.
struct Selection {
  bool weighted = false;
  std::optional<std::pair<std::uint64_t, std::size_t>> fold;  // seed, k
  std::size_t fold_index = 0;
  std::optional<std::pair<double, std::uint64_t>> holdout;    // fraction, seed
};

bool Selected(const Selection& selection, const Record& record, std::uint64_t index) {
  if (!record.Usable(selection.weighted)) return false;
  if (selection.holdout && ExpectedHeldOut(selection.holdout->first, selection.holdout->second, index)) return false;
  if (selection.fold && ExpectedFold(selection.fold->first, index, selection.fold->second) != selection.fold_index) {
    return false;
  }
  return true;
}

// The reference: [X | y] of the selected records, rows times sqrt(w), columns times the scales.
struct Reference {
  arma::mat a;
  std::uint64_t rows = 0;
  double weight_sum = 0;
};

Reference BuildReference(const Data& data, const Design& design, const std::vector<double>& scales,
                         const Selection& selection) {
  Reference reference;
  std::vector<std::uint64_t> chosen;
  for (std::uint64_t i = 0; i < data.records.size(); ++i) {
    if (Selected(selection, data.records[i], i)) chosen.push_back(i);
  }
  const std::size_t m = design.column_count();
  reference.a.zeros(chosen.size(), m + 1);
  for (std::size_t r = 0; r < chosen.size(); ++r) {
    const Record& record = data.records[chosen[r]];
    const double root = std::sqrt(record.units);
    for (std::size_t j = 0; j < m; ++j) reference.a(r, j) = root * ColumnValue(record, design.columns[j].name) * scales[j];
    reference.a(r, m) = root * record.price * scales[m];
    reference.weight_sum += record.units;
  }
  reference.rows = chosen.size();
  return reference;
}

// Largest |G_ij - H_ij| / sqrt(H_ii H_jj) for the Gram matrices G = R'R of the factor and
// H = R'R of a Householder QR of the reference rows.
double GramDifference(const arma::mat& factor_r, const arma::mat& reference_rows) {
  arma::mat q, r;
  EXPECT_TRUE(arma::qr_econ(q, r, reference_rows));
  const arma::mat expected = r.t() * r;
  const arma::mat actual = factor_r.t() * factor_r;
  double worst = 0;
  for (arma::uword i = 0; i < expected.n_rows; ++i) {
    for (arma::uword j = 0; j < expected.n_cols; ++j) {
      const double norm = std::sqrt(expected(i, i) * expected(j, j));
      if (norm > 0) worst = std::max(worst, std::fabs(actual(i, j) - expected(i, j)) / norm);
    }
  }
  return worst;
}

double Relative(double actual, double expected) {
  return std::fabs(actual - expected) / std::max(std::fabs(expected), 1e-300);
}

struct Fixture {
  TempDir folder;
  Data data;
  std::filesystem::path path;
  Design design;
  Fixture(std::size_t rows, bool weighted, std::uint64_t seed) : data(MakeData(rows, weighted, seed)) {
    path = folder.Write("laptops.csv", data.text);
    design = BuildDesign(Spec(weighted), ProfileCsv(path, CsvOptions{}));
  }
};

// (a) The fold of each row is the formula's, by record index over all data records.
class FoldPass : public ::testing::TestWithParam<bool> {};

TEST_P(FoldPass, EveryFoldFactorHoldsExactlyTheRowsOfItsFold) {
  const bool weighted = GetParam();
  Fixture fixture(6000, weighted, weighted ? 41 : 42);
  ASSERT_EQ(fixture.design.column_count(), 1u + 3 + 2 + 1);
  for (const auto& [seed, k] : std::vector<std::pair<std::uint64_t, std::size_t>>{{1, 10}, {0xFEEDull, 3}, {~0ull, 7}}) {
    PassOptions options;
    options.folds = FoldSettings{k, seed};
    const PassResult pass = RunFactorPass(fixture.path, fixture.design, options);
    ASSERT_EQ(pass.fold_factors.size(), k);
    std::uint64_t rows = 0;
    for (std::size_t f = 0; f < k; ++f) {
      Selection selection;
      selection.weighted = weighted;
      selection.fold = {seed, k};
      selection.fold_index = f;
      const Factor& factor = pass.fold_factors[f];
      const Reference reference = BuildReference(fixture.data, fixture.design, factor.scales, selection);
      EXPECT_EQ(factor.rows, reference.rows) << "seed " << seed << " fold " << f;
      EXPECT_LE(Relative(factor.weight_sum, reference.weight_sum), 1e-13) << "seed " << seed << " fold " << f;
      EXPECT_LE(GramDifference(factor.r, reference.a), 1e-10) << "seed " << seed << " fold " << f;
      rows += factor.rows;
    }
    EXPECT_EQ(rows, pass.accounting.rows_used);
  }
}

// The same rows, had the fold been counted among used rows only: a different assignment, so the
// check above would notice an index that skipped dropped rows.
TEST_P(FoldPass, TheIndexCountsDroppedRecordsToo) {
  const bool weighted = GetParam();
  Fixture fixture(3000, weighted, 43);
  const std::size_t k = 5;
  const std::uint64_t seed = 1;
  PassOptions options;
  options.folds = FoldSettings{k, seed};
  const PassResult pass = RunFactorPass(fixture.path, fixture.design, options);
  std::vector<std::uint64_t> by_used_index(k, 0), by_record_index(k, 0);
  std::uint64_t used = 0;
  for (std::uint64_t i = 0; i < fixture.data.records.size(); ++i) {
    if (!fixture.data.records[i].Usable(weighted)) continue;
    ++by_record_index[ExpectedFold(seed, i, k)];
    ++by_used_index[ExpectedFold(seed, used++, k)];
  }
  ASSERT_NE(by_used_index, by_record_index) << "the data should tell the two indices apart";
  for (std::size_t f = 0; f < k; ++f) EXPECT_EQ(pass.fold_factors[f].rows, by_record_index[f]) << "fold " << f;
}

INSTANTIATE_TEST_SUITE_P(WeightedAndUnweighted, FoldPass, ::testing::Bool(),
                         [](const ::testing::TestParamInfo<bool>& info) {
                           return info.param ? std::string("Weighted") : std::string("Unweighted");
                         });

// (b) Threads, read blocks and fold blocks change nothing but rounding.
TEST(FoldPass, ThreadsAndBlockSizesGiveTheSameFoldFactors) {
  Fixture fixture(20000, true, 44);  // 5 spill chunks: every thread gets a share
  PassOptions options;
  options.folds = FoldSettings{10, 2026};
  const PassResult first = RunFactorPass(fixture.path, fixture.design, options);
  ASSERT_EQ(first.fold_factors.size(), 10u);
  for (int threads : {1, 2, 3}) {
    for (std::size_t block_rows : {std::size_t{256}, std::size_t{1}, std::size_t{37}}) {
      for (std::size_t block_bytes : {std::size_t{1} << 20, std::size_t{4093}}) {
        options.threads = threads;
        options.block_rows = block_rows;
        options.csv.block_bytes = block_bytes;
        const PassResult other = RunFactorPass(fixture.path, fixture.design, options);
        const std::string label = std::to_string(threads) + " threads, block_rows " + std::to_string(block_rows) +
                                  ", block_bytes " + std::to_string(block_bytes);
        EXPECT_EQ(other.accounting.rows_read, first.accounting.rows_read) << label;
        EXPECT_EQ(other.accounting.rows_used, first.accounting.rows_used) << label;
        EXPECT_EQ(other.accounting.rows_dropped, first.accounting.rows_dropped) << label;
        ASSERT_EQ(other.fold_factors.size(), first.fold_factors.size()) << label;
        for (std::size_t f = 0; f < first.fold_factors.size(); ++f) {
          const Factor& a = other.fold_factors[f];
          const Factor& b = first.fold_factors[f];
          EXPECT_EQ(a.rows, b.rows) << label << " fold " << f;
          EXPECT_EQ(a.scales, b.scales) << label << " fold " << f;
          EXPECT_LE(Relative(a.weight_sum, b.weight_sum), 1e-13) << label << " fold " << f;
          EXPECT_LE(Relative(a.log_weight_sum, b.log_weight_sum), 1e-13) << label << " fold " << f;
          EXPECT_LE(testing::ColumnRelativeDifference(a.r, b.r), 1e-13) << label << " fold " << f;
        }
      }
    }
  }
  // A given layout gives the same bits every time.
  options.threads = 3;
  options.block_rows = 37;
  options.csv.block_bytes = 4093;
  const PassResult once = RunFactorPass(fixture.path, fixture.design, options);
  const PassResult again = RunFactorPass(fixture.path, fixture.design, options);
  for (std::size_t f = 0; f < once.fold_factors.size(); ++f) {
    EXPECT_TRUE(arma::approx_equal(once.fold_factors[f].r, again.fold_factors[f].r, "absdiff", 0.0)) << "fold " << f;
    EXPECT_EQ(once.fold_factors[f].weight_sum, again.fold_factors[f].weight_sum) << "fold " << f;
  }
}

// (c) The fold factors merged are the plain factor.
TEST(FoldPass, MergedFoldFactorsAreThePlainFactor) {
  for (const bool weighted : {false, true}) {
    Fixture fixture(5000, weighted, 45);
    const PassResult plain = RunFactorPass(fixture.path, fixture.design, PassOptions{});
    EXPECT_TRUE(plain.fold_factors.empty());
    PassOptions options;
    options.folds = FoldSettings{7, 3};
    const PassResult folded = RunFactorPass(fixture.path, fixture.design, options);
    Factor merged = folded.fold_factors[0];
    for (std::size_t f = 1; f < folded.fold_factors.size(); ++f) merged = MergeFactors(merged, folded.fold_factors[f]);
    for (const Factor* factor : std::vector<const Factor*>{&merged, &folded.factor}) {
      EXPECT_EQ(factor->rows, plain.factor.rows);
      EXPECT_LE(Relative(factor->weight_sum, plain.factor.weight_sum), 1e-12);
      EXPECT_LE(testing::ColumnRelativeDifference(factor->r, plain.factor.r), 1e-12) << (weighted ? "weighted" : "unweighted");
      ASSERT_EQ(factor->column_stats.size(), plain.factor.column_stats.size());
      for (std::size_t j = 0; j < plain.factor.column_stats.size(); ++j) {
        EXPECT_EQ(factor->column_stats[j].count, plain.factor.column_stats[j].count);
        EXPECT_EQ(factor->column_stats[j].min, plain.factor.column_stats[j].min);
        EXPECT_EQ(factor->column_stats[j].max, plain.factor.column_stats[j].max);
        EXPECT_LE(Relative(factor->column_stats[j].mean, plain.factor.column_stats[j].mean), 1e-12);
      }
    }
    // And the plain factor itself is the QR of every used row.
    Selection all;
    all.weighted = weighted;
    const Reference reference = BuildReference(fixture.data, fixture.design, plain.factor.scales, all);
    EXPECT_EQ(plain.factor.rows, reference.rows);
    EXPECT_LE(GramDifference(plain.factor.r, reference.a), 1e-10);
  }
}

// More folds than some folds have rows: empty folds merge as nothing.
TEST(FoldPass, EmptyFoldsMergeAsNothing) {
  Fixture fixture(40, true, 46);
  PassOptions options;
  options.folds = FoldSettings{100, 9};
  const PassResult folded = RunFactorPass(fixture.path, fixture.design, options);
  const PassResult plain = RunFactorPass(fixture.path, fixture.design, PassOptions{});
  ASSERT_EQ(folded.fold_factors.size(), 100u);
  std::size_t empty = 0;
  for (const Factor& factor : folded.fold_factors) empty += factor.rows == 0 ? 1 : 0;
  EXPECT_GE(empty, 50u);
  EXPECT_EQ(folded.factor.rows, plain.factor.rows);
  EXPECT_LE(testing::ColumnRelativeDifference(folded.factor.r, plain.factor.r), 1e-12);
}

// (d) With a holdout, the fold factors hold only the rows kept, and every row is accounted for.
TEST(FoldPass, HeldOutRowsEnterNoFoldAndAreCounted) {
  for (const bool weighted : {false, true}) {
    Fixture fixture(8000, weighted, 47);
    const double fraction = 0.25;
    const std::uint64_t holdout_seed = 99;
    const std::size_t k = 4;
    const std::uint64_t fold_seed = 5;
    PassOptions options;
    options.folds = FoldSettings{k, fold_seed};
    options.holdout = HoldoutSettings{fraction, holdout_seed};
    for (int threads : {1, 3}) {
      options.threads = threads;
      const PassResult pass = RunFactorPass(fixture.path, fixture.design, options);
      const RowAccounting& rows = pass.accounting;
      std::uint64_t usable = 0, held_out = 0;
      for (std::uint64_t i = 0; i < fixture.data.records.size(); ++i) {
        if (!fixture.data.records[i].Usable(weighted)) continue;
        ++usable;
        if (ExpectedHeldOut(fraction, holdout_seed, i)) ++held_out;
      }
      EXPECT_EQ(rows.rows_read, fixture.data.records.size());
      EXPECT_EQ(rows.rows_held_out, held_out);
      EXPECT_EQ(rows.rows_used, usable - held_out);
      EXPECT_EQ(rows.rows_used + rows.rows_held_out + rows.RowsDroppedTotal(), rows.rows_read);
      EXPECT_EQ(pass.factor.rows, rows.rows_used);
      // Binomial(usable, 0.25): within 5 standard deviations (common practice).
      EXPECT_NEAR(static_cast<double>(held_out), 0.25 * static_cast<double>(usable),
                  5 * std::sqrt(0.25 * 0.75 * static_cast<double>(usable)));
      for (std::size_t f = 0; f < k; ++f) {
        Selection selection;
        selection.weighted = weighted;
        selection.fold = {fold_seed, k};
        selection.fold_index = f;
        selection.holdout = {fraction, holdout_seed};
        const Factor& factor = pass.fold_factors[f];
        const Reference reference = BuildReference(fixture.data, fixture.design, factor.scales, selection);
        EXPECT_EQ(factor.rows, reference.rows) << threads << " threads, fold " << f;
        EXPECT_LE(Relative(factor.weight_sum, reference.weight_sum), 1e-13) << "fold " << f;
        EXPECT_LE(GramDifference(factor.r, reference.a), 1e-10) << threads << " threads, fold " << f;
      }
    }
  }
}

// The replays: ForEachUsedRow visits the kept rows or the held-out ones, by the same formula,
// and BuildFoldFactors (the replay fallback of a wide design) gives the pass's fold factors.
TEST(FoldPass, ReplaysSplitTheRowsAsThePassDoes) {
  Fixture fixture(5000, true, 48);
  const ScanResult scan = [&] {
    ScanOptions scan_options;
    return ScanData(fixture.path, scan_options);
  }();
  const HoldoutSettings holdout{0.3, 12345};
  std::set<std::uint64_t> kept, held;
  ForEachUsedRow(*scan.spill, fixture.design, [&](const UsedRow& row) { kept.insert(row.row_index); }, holdout,
                 RowSet::kModelRows);
  ForEachUsedRow(*scan.spill, fixture.design, [&](const UsedRow& row) { held.insert(row.row_index); }, holdout,
                 RowSet::kHeldOutRows);
  std::set<std::uint64_t> expected_kept, expected_held;
  for (std::uint64_t i = 0; i < fixture.data.records.size(); ++i) {
    if (!fixture.data.records[i].Usable(true)) continue;
    (ExpectedHeldOut(holdout.fraction, holdout.seed, i) ? expected_held : expected_kept).insert(i);
  }
  EXPECT_EQ(kept, expected_kept);
  EXPECT_EQ(held, expected_held);
  std::set<std::uint64_t> none;
  ForEachUsedRow(*scan.spill, fixture.design, [&](const UsedRow& row) { none.insert(row.row_index); }, std::nullopt,
                 RowSet::kHeldOutRows);
  EXPECT_TRUE(none.empty()) << "no holdout: no held-out rows";

  PassOptions options;
  options.folds = FoldSettings{6, 77};
  options.holdout = holdout;
  const PassResult pass = RunFactorPass(*scan.spill, fixture.design, options);
  std::vector<std::size_t> columns(fixture.design.column_count());
  for (std::size_t j = 0; j < columns.size(); ++j) columns[j] = j;
  const std::vector<Factor> replayed =
      BuildFoldFactors(*scan.spill, fixture.design, columns, *options.folds, holdout, 53);
  ASSERT_EQ(replayed.size(), pass.fold_factors.size());
  for (std::size_t f = 0; f < replayed.size(); ++f) {
    EXPECT_EQ(replayed[f].rows, pass.fold_factors[f].rows) << "fold " << f;
    EXPECT_EQ(replayed[f].scales, pass.fold_factors[f].scales) << "fold " << f;
    EXPECT_LE(testing::ColumnRelativeDifference(replayed[f].r, pass.fold_factors[f].r), 1e-12) << "fold " << f;
  }
  // A subset of columns in another order: the factor of exactly those columns, then the response.
  const std::vector<std::size_t> subset = {3, 0, 6};
  const std::vector<Factor> narrow = BuildFoldFactors(*scan.spill, fixture.design, subset, *options.folds, holdout);
  for (std::size_t f = 0; f < narrow.size(); ++f) {
    Selection selection;
    selection.weighted = true;
    selection.fold = {options.folds->seed, options.folds->k};
    selection.fold_index = f;
    selection.holdout = {holdout.fraction, holdout.seed};
    const Reference full = BuildReference(fixture.data, fixture.design, pass.fold_factors[f].scales, selection);
    arma::mat a(full.a.n_rows, subset.size() + 1);
    for (std::size_t j = 0; j < subset.size(); ++j) a.col(j) = full.a.col(subset[j]);
    a.col(subset.size()) = full.a.col(full.a.n_cols - 1);
    EXPECT_EQ(narrow[f].rows, full.rows);
    EXPECT_LE(GramDifference(narrow[f].r, a), 1e-10) << "fold " << f;
  }
}

}  // namespace
}  // namespace stepledger

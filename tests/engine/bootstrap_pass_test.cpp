// The Poisson bootstrap's replicate factors (engine/bootstrap_pass.h): the counts against the
// formula, each replicate's factor against a direct QR of its count-weighted rows, and the same
// bits for any thread count and batch size.

#include "stepledger/engine/bootstrap_pass.h"

#include <armadillo>
#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/table_scan.h"
#include "support/factor_compare.h"
#include "support/term_specs.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

// The draw written out from README "Validation", apart from engine/resampling.h: count c of
// record i in replicate r is the smallest c with u < P(X <= c), X ~ Poisson(1), where
// u = (SplitMix64(RecordHash(seed, i) + (r + 1) * gamma) >> 11) * 2^-53.
std::uint64_t Finalise(std::uint64_t z) {
  z ^= z >> 30;
  z *= 0xBF58476D1CE4E5B9ull;
  z ^= z >> 27;
  z *= 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}
constexpr std::uint64_t kGamma = 0x9E3779B97F4A7C15ull;
unsigned CountByFormula(std::uint64_t seed, std::uint64_t record, std::uint64_t replicate) {
  const std::uint64_t record_hash = Finalise(seed + (record + 1) * kGamma);
  const double u = static_cast<double>(Finalise(record_hash + (replicate + 1) * kGamma) >> 11) * 0x1p-53;
  // P(X <= c) = e^-1 * sum_{j <= c} 1/j! (the Poisson distribution's definition).
  double term = std::exp(-1.0), cdf = term;
  unsigned count = 0;
  while (!(u < cdf) && count < 30) {
    ++count;
    term /= count;
    cdf += term;
  }
  return count;
}

TEST(BootstrapDraws, CountsOfTheFirstRecordsAndReplicates) {
  // Seed 11, records 0..5, replicates 0..7: computed with Python's integers and 50-digit decimals
  // (the formula above, the CDF from e^-1 * sum 1/j!).
  const std::vector<std::vector<unsigned>> expected = {
      {1, 0, 0, 2, 1, 0, 0, 0}, {0, 0, 0, 0, 5, 1, 1, 2}, {3, 2, 0, 0, 0, 3, 0, 0},
      {0, 0, 0, 1, 2, 2, 0, 2}, {3, 2, 2, 1, 3, 0, 1, 0}, {1, 2, 1, 0, 2, 0, 1, 1}};
  for (std::uint64_t record = 0; record < expected.size(); ++record) {
    for (std::size_t replicate = 0; replicate < expected[record].size(); ++replicate) {
      EXPECT_EQ(PoissonDraws::CountOf(11, record, replicate), expected[record][replicate])
          << "record " << record << ", replicate " << replicate;
    }
  }
}

TEST(BootstrapDraws, AgreeWithTheFormulaAndHaveMeanAndVarianceOne) {
  double sum = 0, sum_squares = 0;
  const std::uint64_t records = 20000;
  for (std::uint64_t record = 0; record < records; ++record) {
    for (std::size_t replicate = 0; replicate < 5; ++replicate) {
      const unsigned count = PoissonDraws::CountOf(3, record, replicate);
      ASSERT_EQ(count, CountByFormula(3, record, replicate)) << record << "/" << replicate;
      sum += count;
      sum_squares += static_cast<double>(count) * count;
    }
  }
  const double n = 5.0 * records;
  const double mean = sum / n, variance = sum_squares / n - mean * mean;
  // Poisson(1): mean and variance 1; 1e5 draws put 5 standard errors near 0.016 and 0.03.
  EXPECT_NEAR(mean, 1.0, 0.016);
  EXPECT_NEAR(variance, 1.0, 0.03);
}

// Invented rows with missing cells, precision weights, a categorical column and a product, so
// that the record index (all records, used or not) decides the counts.
std::string MakeRows(std::size_t rows) {
  testing::TestRandom random(20261203);
  const char* levels[] = {"north", "south", "east"};
  std::string text = "y,a,b,region,w\n";
  for (std::size_t i = 0; i < rows; ++i) {
    const double a = 40 + 10 * random.Normal();
    const double b = random.Uniform(0, 100);
    const char* region = levels[static_cast<std::size_t>(random.Uniform(0, 3))];
    const double y = 2 + 0.7 * a - 0.05 * b + random.Normal();
    const bool missing = random.Uniform(0, 1) < 0.03;
    text += std::to_string(y) + "," + (missing ? std::string() : std::to_string(a)) + "," + std::to_string(b) + "," +
            region + "," + std::to_string(0.5 + random.Uniform(0, 1)) + "\n";
  }
  return text;
}

DesignSpec Spec() {
  DesignSpec spec;
  spec.response = "y";
  spec.weights = "w";
  spec.terms = {testing::Numeric("a", "a"), testing::Numeric("b", "b"),
                testing::Categorical("region", "region")};
  TermSpec product;
  product.name = "a:region";
  product.kind = TermKind::kProduct;
  product.parts = {"a", "region"};
  product.key_path = "terms[3]";
  spec.terms.push_back(product);
  return spec;
}

struct Scanned {
  testing::TempDir folder;
  ScanResult scan;
  Design design;
};

std::unique_ptr<Scanned> Scan(std::size_t rows) {
  auto scanned = std::make_unique<Scanned>();
  const auto path = scanned->folder.Write("rows.csv", MakeRows(rows));
  scanned->scan = ScanData(path, ScanOptions{});
  scanned->design = BuildDesign(Spec(), scanned->scan.profile);
  return scanned;
}

TEST(BootstrapPass, EachReplicateFactorIsTheQrOfItsCountWeightedRows) {
  const auto scanned = Scan(3000);
  const Design& design = scanned->design;
  BootstrapPassOptions options;
  options.settings = {5, 42};
  options.holdout = HoldoutSettings{0.25, 9};
  options.threads = 2;
  const std::vector<Factor> factors = BuildBootstrapFactors(*scanned->scan.spill, design, options);
  ASSERT_EQ(factors.size(), 5u);

  // The rows themselves, and the counts by the formula above; held-out rows by the README's rule
  // (hash < fraction * 2^64, exact in long double).
  std::vector<std::vector<double>> rows;
  std::vector<std::uint64_t> records;
  ForEachUsedRow(*scanned->scan.spill, design, [&](const UsedRow& row) {
    std::vector<double> values(row.x.begin(), row.x.end());
    values.push_back(row.y);
    values.push_back(row.weight);
    rows.push_back(std::move(values));
    records.push_back(row.row_index);
  });
  const std::vector<double> scales = design.scales();
  const std::size_t columns = design.column_count() + 1;
  for (std::size_t r = 0; r < factors.size(); ++r) {
    std::vector<arma::rowvec> kept;
    std::uint64_t copies_total = 0;
    double weight_total = 0;
    for (std::size_t i = 0; i < rows.size(); ++i) {
      const bool held_out = static_cast<long double>(Finalise(9 + (records[i] + 1) * kGamma)) <
                            std::ldexp(static_cast<long double>(0.25), 64);
      if (held_out) continue;
      const unsigned copies = CountByFormula(42, records[i], r);
      if (copies == 0) continue;
      const double weight = rows[i][columns];
      arma::rowvec scaled(columns);
      for (std::size_t j = 0; j < columns; ++j) scaled(j) = std::sqrt(weight * copies) * rows[i][j] * scales[j];
      kept.push_back(scaled);
      copies_total += copies;
      weight_total += weight * copies;
    }
    arma::mat a(kept.size(), columns);
    for (std::size_t i = 0; i < kept.size(); ++i) a.row(i) = kept[i];
    arma::mat q, direct;
    ASSERT_TRUE(arma::qr_econ(q, direct, a));
    for (arma::uword i = 0; i < direct.n_rows; ++i) {
      if (direct(i, i) < 0) direct.row(i) *= -1.0;
    }
    EXPECT_EQ(factors[r].rows, copies_total) << "replicate " << r;
    EXPECT_NEAR(factors[r].weight_sum, weight_total, 1e-12 * weight_total) << "replicate " << r;
    EXPECT_LT(testing::ColumnRelativeDifference(factors[r].r, direct), 1e-10) << "replicate " << r;
    EXPECT_TRUE(factors[r].column_stats.empty()) << "replicate factors keep no column statistics";
  }
}

TEST(BootstrapPass, TheSameBitsForAnyThreadCountAndBatchSize) {
  const auto scanned = Scan(5000);
  BootstrapPassOptions options;
  options.settings = {7, 11};
  const std::vector<Factor> expected = BuildBootstrapFactors(*scanned->scan.spill, scanned->design, options);
  for (int threads : {2, 3}) {
    for (std::size_t batch_rows : {std::size_t{1000}, std::size_t{4096}}) {
      options.threads = threads;
      options.batch_rows = batch_rows;
      const std::vector<Factor> factors = BuildBootstrapFactors(*scanned->scan.spill, scanned->design, options);
      ASSERT_EQ(factors.size(), expected.size());
      for (std::size_t r = 0; r < factors.size(); ++r) {
        EXPECT_EQ(factors[r].rows, expected[r].rows);
        EXPECT_EQ(factors[r].weight_sum, expected[r].weight_sum);
        EXPECT_EQ(factors[r].log_weight_sum, expected[r].log_weight_sum);
        EXPECT_TRUE(arma::approx_equal(factors[r].r, expected[r].r, "absdiff", 0.0))
            << threads << " threads, batches of " << batch_rows << ", replicate " << r;
      }
    }
  }
}

TEST(BootstrapPass, ProgressCountsTheUsedRowsAndBytesAreBudgeted) {
  const auto scanned = Scan(9000);
  BootstrapPassOptions options;
  options.settings = {2, 1};
  options.batch_rows = 4096;
  std::vector<std::uint64_t> seen;
  options.progress = [&seen](std::uint64_t done) { seen.push_back(done); };
  BuildBootstrapFactors(*scanned->scan.spill, scanned->design, options);
  ASSERT_EQ(seen.size(), 3u);
  EXPECT_EQ(seen[0], 4096u);
  EXPECT_EQ(seen[1], 8192u);
  std::uint64_t used = 0;
  ForEachUsedRow(*scanned->scan.spill, scanned->design, [&used](const UsedRow&) { ++used; });
  EXPECT_EQ(seen[2], used);
  // 30 columns, 200 replicates, blocks of 128 rows: 200 x (31^2 + 128 x 31) doubles.
  EXPECT_EQ(BootstrapFactorBytes(30, 200, 128), 200u * (31u * 31u + 128u * 31u) * 8u);
}

TEST(FactorBuilder, RepeatedRowEqualsItsCopies) {
  const std::vector<double> scales = {1, 1, 1};
  FactorBuilder repeated(scales, 4), copied(scales, 4);
  const std::vector<double> x1 = {1, 2.5}, x2 = {1, -1.25};
  repeated.AddRepeatedRow(x1, 3.0, 0.5, 3);
  repeated.AddRow(x2, 1.0, 2.0);
  for (int copy = 0; copy < 3; ++copy) copied.AddRow(x1, 3.0, 0.5);
  copied.AddRow(x2, 1.0, 2.0);
  const Factor a = repeated.Finish(), b = copied.Finish();
  EXPECT_EQ(a.rows, 4u);
  EXPECT_EQ(a.rows, b.rows);
  EXPECT_DOUBLE_EQ(a.weight_sum, b.weight_sum);
  EXPECT_DOUBLE_EQ(a.log_weight_sum, b.log_weight_sum);
  EXPECT_LT(testing::ColumnRelativeDifference(a.r.t() * a.r, b.r.t() * b.r), 1e-14);
  EXPECT_EQ(a.column_stats[1].count, 4u);
  EXPECT_DOUBLE_EQ(a.column_stats[1].mean, b.column_stats[1].mean);
}

}  // namespace
}  // namespace stepledger

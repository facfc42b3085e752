// A run shared by processes (RunOptions::shares; run/src/shared_run.h), the processes played by
// threads over an in-process exchange (no MPI, so this runs under the sanitizers too), against
// the plain run of the same plan on the same file:
//  - the refinement, summed on every process and added through the tree, gives the plain fit to
//    1e-12 relative (the factors merge in another order: rounding only);
//  - the diagnostics and prediction support, diagnosed where the rows lie and folded in record
//    order on process 0, are exactly what one process computes from the shared run's own fit
//    over the whole file (the same bits: the summaries depend on the order of the rows);
//  - the holdout, evaluated where the held-out rows lie, matches the plain run to 1e-12 and
//    counts exactly.
// The data are an invented simulation whose true model the test knows: a reseller of
// refurbished laptops, price = 300 - 6 age + 20 ram + 0.5 age x ram + noise (sd 20), `battery`
// without effect, a grade with three levels, weights (units) from 1 to 3, a few rows missing
// the age (dropped).

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <optional>
#include <random>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/model_support.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/run/run_plan.h"
#include "support/test_paths.h"
#include "support/thread_exchange.h"

namespace stepledger {
namespace {

constexpr const char* kPlan = R"({"response": "price", "weights": "units", "method": "stepwise",
  "criterion": "bic", "holdout": {"fraction": 0.25, "seed": 5},
  "terms": [{"name": "age", "column": "age"}, {"name": "ram", "column": "ram"},
            {"name": "battery", "column": "battery"}, {"name": "grade", "categorical": "grade"},
            {"name": "age:ram", "product": ["age", "ram"]}]})";

std::string InventedListings(std::size_t rows) {
  std::mt19937_64 random(20261203);
  std::normal_distribution<double> noise(0, 20);
  std::uniform_int_distribution<int> age(1, 8), ram(2, 16), units(1, 3), grade(0, 2);
  std::uniform_real_distribution<double> battery(50, 100);
  std::ostringstream csv;
  csv.precision(17);
  csv << "price,age,ram,battery,grade,units\n";
  for (std::size_t i = 0; i < rows; ++i) {
    const double a = age(random), r = ram(random);
    const double price = 300 - 6 * a + 20 * r + 0.5 * a * r + noise(random);
    csv << price << ',';
    if (i % 97 != 13) csv << a;
    csv << ',' << r << ',' << battery(random) << ',' << "ABC"[grade(random)] << ',' << units(random) << '\n';
  }
  return csv.str();
}

// Runs the plan with `processes` threads playing processes; returns process 0's result.
RunResult SharedRun(const std::filesystem::path& data, int processes, int threads) {
  testing::Mailboxes boxes;
  std::optional<RunResult> result;
  std::vector<std::string> errors(static_cast<std::size_t>(processes));
  std::vector<std::thread> workers;
  for (int p = 0; p < processes; ++p) {
    workers.emplace_back([&, p] {
      testing::ThreadExchange exchange(boxes, p, processes);
      RunOptions options;
      options.threads = threads;
      options.shares = &exchange;
      try {
        RunResult run = RunPlan(data, ParsePlanText(kPlan), options);
        if (p == 0) result = std::move(run);
        else errors[static_cast<std::size_t>(p)] = "process " + std::to_string(p) + " returned a result";
      } catch (const ShareServed&) {
        if (p == 0) errors[0] = "process 0 was told it served";
      } catch (const std::exception& error) {
        errors[static_cast<std::size_t>(p)] = error.what();
      }
    });
  }
  for (std::thread& worker : workers) worker.join();
  for (const std::string& error : errors) EXPECT_EQ(error, "");
  if (!result) throw std::runtime_error("no result on process 0");
  return std::move(*result);
}

void ExpectClose(double a, double b, const std::string& what) {
  EXPECT_NEAR(a, b, 1e-12 * std::max(std::abs(a), std::abs(b))) << what;
}

TEST(SharedRun, RefinementDiagnosticsAndHoldoutWhereTheRowsLie) {
  testing::TempDir folder;
  const auto data = folder.Write("listings.csv", InventedListings(3000));
  RunOptions plain_options;
  plain_options.threads = 2;
  const RunResult plain = RunPlan(data, ParsePlanText(kPlan), plain_options);
  ASSERT_TRUE(plain.diagnostics);
  ASSERT_TRUE(plain.validation.holdout);
  ASSERT_GT(plain.validation.holdout->rows, 500u);

  for (const auto& [processes, threads] : std::vector<std::pair<int, int>>{{1, 1}, {2, 1}, {3, 2}}) {
    const std::string label = std::to_string(processes) + " processes x " + std::to_string(threads) + " threads";
    const RunResult shared = SharedRun(data, processes, threads);
    EXPECT_EQ(shared.processes, processes > 1 ? processes : 1) << label;

    // The refinement: the plain fit to 1e-12.
    ASSERT_EQ(shared.fit.columns, plain.fit.columns) << label;
    EXPECT_GT(shared.fit.refinement_passes, 0) << label;
    for (std::size_t j = 0; j < plain.fit.k; ++j) ExpectClose(shared.fit.beta(j), plain.fit.beta(j), label + " beta");
    ExpectClose(shared.fit.rss, plain.fit.rss, label + " rss");
    ExpectClose(shared.fit.tss, plain.fit.tss, label + " tss");

    // The diagnostics and the support: one process's bits from the shared run's own fit.
    PredictionSupport support;
    DiagnosticsOptions options;
    // The model's rows of the whole file (the held-out ones set aside), read by one process.
    ScanOptions scan_options;
    scan_options.csv = shared.options.csv;
    const ScanResult scan = ScanData(data, scan_options);
    const DiagnosticsResult alone = DiagnoseAndLearnSupport(
        shared.fit, shared.design, SpillRowReplay(scan.spill, shared.design, shared.plan.plan.search.holdout), support,
        options);
    ASSERT_TRUE(shared.diagnostics) << label;
    const DiagnosticsResult& spread = *shared.diagnostics;
    EXPECT_EQ(spread.rows, alone.rows) << label;
    EXPECT_EQ(spread.press, alone.press) << label;
    EXPECT_EQ(spread.max_leverage, alone.max_leverage) << label;
    EXPECT_EQ(spread.max_leverage_line, alone.max_leverage_line) << label;
    EXPECT_EQ(spread.weighted_residual_sum_of_squares, alone.weighted_residual_sum_of_squares) << label;
    EXPECT_EQ(spread.stand_out, alone.stand_out) << label;
    EXPECT_EQ(spread.largest_leverage, alone.largest_leverage) << label;
    EXPECT_EQ(spread.largest_cooks_distance, alone.largest_cooks_distance) << label;
    EXPECT_EQ(spread.largest_standardized_residual, alone.largest_standardized_residual) << label;
    EXPECT_EQ(spread.standardized_histogram, alone.standardized_histogram) << label;
    EXPECT_EQ(spread.fitted_residual_density.counts, alone.fitted_residual_density.counts) << label;
    EXPECT_EQ(spread.cooks_by_line.largest, alone.cooks_by_line.largest) << label;
    ASSERT_EQ(spread.normal_quantiles.size(), alone.normal_quantiles.size()) << label;
    for (std::size_t i = 0; i < alone.normal_quantiles.size(); ++i) {
      EXPECT_EQ(spread.normal_quantiles[i].sample, alone.normal_quantiles[i].sample) << label << " quantile " << i;
    }
    ASSERT_EQ(shared.prediction_support.ranges.size(), support.ranges.size()) << label;
    for (std::size_t i = 0; i < support.ranges.size(); ++i) {
      EXPECT_EQ(shared.prediction_support.ranges[i].min, support.ranges[i].min) << label;
      EXPECT_EQ(shared.prediction_support.ranges[i].max, support.ranges[i].max) << label;
    }
    EXPECT_EQ(shared.prediction_support.max_unit_leverage, support.max_unit_leverage) << label;
    EXPECT_EQ(shared.prediction_support.max_unit_leverage_line, support.max_unit_leverage_line) << label;

    // The holdout: the plain run's to 1e-12, counts exactly.
    ASSERT_TRUE(shared.validation.holdout) << label;
    const HoldoutValidation& a = *shared.validation.holdout;
    const HoldoutValidation& b = *plain.validation.holdout;
    EXPECT_EQ(a.rows, b.rows) << label;
    EXPECT_EQ(a.rows_outside_ranges, b.rows_outside_ranges) << label;
    EXPECT_EQ(a.rows_high_leverage, b.rows_high_leverage) << label;
    ExpectClose(*a.rmse, *b.rmse, label + " holdout rmse");
    ASSERT_EQ(a.calibration.size(), b.calibration.size()) << label;
    for (std::size_t d = 0; d < b.calibration.size(); ++d) {
      EXPECT_EQ(a.calibration[d].rows, b.calibration[d].rows) << label << " decile " << d;
      ExpectClose(a.calibration[d].mean_prediction, b.calibration[d].mean_prediction, label + " calibration");
    }
  }
}

}  // namespace
}  // namespace stepledger

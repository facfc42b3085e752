// The factor pass over a file: row accounting, the byte observer, the thread-count
// invariance of the factor, and the replay of used rows.

#include "stepledger/engine/data_pass.h"

#include <pwd.h>
#include <signal.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/notice.h"
#include "stepledger/engine/profile.h"
#include "stepledger/engine/table_scan.h"
#include "support/factor_compare.h"
#include "support/term_specs.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::TempDir;

// Row 3 misses age, row 4 has weight 0, row 5 misses the price: 3 rows used (weights 1, 2, 3).
constexpr const char* kLaptops =
    "price,age,grade,units\n"
    "100,10,A,1\n"
    "200,20,B,2\n"
    "150,,A,1\n"
    "300,30,C,0\n"
    "NA,5,B,1\n"
    "250,40,A,3\n";

DesignSpec LaptopSpec() {
  DesignSpec spec;
  spec.response = "price";
  spec.weights = "units";
  spec.terms = {testing::Numeric("age", "age"),
                testing::Categorical("grade", "grade")};
  return spec;
}

// An invented data set with missing cells, zero weights and a categorical column; the
// generator counts the drops it makes, so the accounting has known answers.
struct Generated {
  std::string text;
  std::uint64_t rows = 0, missing_y = 0, zero_weight = 0, missing_a = 0, used = 0;
};

Generated Generate(std::size_t rows) {
  std::mt19937_64 random(20261201);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::normal_distribution<double> normal(0.0, 1.0);
  const char* levels[] = {"north", "south", "east", "west"};
  Generated data;
  data.text = "y,a,b,region,w\n";
  char line[256];
  for (std::size_t i = 0; i < rows; ++i) {
    const double a = 50 + 20 * normal(random);
    const double b = 1000 * uniform(random);
    const char* region = levels[random() % 4];
    const double y = 3 + 0.5 * a - 0.01 * b + normal(random);
    const double w = uniform(random) < 0.03 ? 0.0 : 0.5 + uniform(random);
    const bool y_missing = uniform(random) < 0.02;
    const bool a_missing = uniform(random) < 0.02;
    std::snprintf(line, sizeof line, "%s,%s,%.6f,%s,%.4f\n",
                  y_missing ? "NA" : std::to_string(y).c_str(),
                  a_missing ? "" : std::to_string(a).c_str(), b, region, w);
    data.text += line;
    ++data.rows;
    if (y_missing) {
      ++data.missing_y;
    } else if (w == 0.0) {
      ++data.zero_weight;
    } else if (a_missing) {
      ++data.missing_a;
    } else {
      ++data.used;
    }
  }
  return data;
}

DesignSpec GeneratedSpec() {
  DesignSpec spec;
  spec.response = "y";
  spec.weights = "w";
  spec.terms = {testing::Numeric("a", "a"), testing::Numeric("b", "b"),
                testing::Categorical("region", "region")};
  spec.terms.push_back(testing::Power("a^2", "a", 2));
  TermSpec product;
  product.name = "a:region";
  product.kind = TermKind::kProduct;
  product.parts = {"a", "region"};
  product.key_path = "terms[4]";
  spec.terms.push_back(product);
  return spec;
}

TEST(DataPassTest, AccountingAndFactorOfTheSmallFile) {
  TempDir folder;
  const auto path = folder.Write("laptops.csv", kLaptops);
  const Design design = BuildDesign(LaptopSpec(), ProfileCsv(path, CsvOptions{}));
  const PassResult result = RunFactorPass(path, design, PassOptions{});
  // Counted by hand from kLaptops.
  EXPECT_EQ(result.accounting.rows_read, 6u);
  EXPECT_EQ(result.accounting.rows_used, 3u);
  // By reason (missing before zero weight), then column.
  const std::vector<RowDrop> dropped = {{DropReason::kMissing, "age", 1},
                                        {DropReason::kMissing, "price", 1},
                                        {DropReason::kZeroWeight, "units", 1}};
  EXPECT_EQ(result.accounting.rows_dropped, dropped);
  EXPECT_EQ(result.accounting.RowsDroppedTotal(), 3u);
  EXPECT_EQ(result.factor.rows, 3u);
  EXPECT_DOUBLE_EQ(result.factor.weight_sum, 6.0);
  EXPECT_DOUBLE_EQ(result.factor.log_weight_sum, std::log(2.0) + std::log(3.0));
  EXPECT_EQ(result.factor.scales, design.scales());
  ASSERT_EQ(result.factor.r.n_rows, design.column_count() + 1);
  // Common practice: R'R = X'WX of the scaled augmented matrix; the (0,0) entry is the sum of
  // the weights times the intercept's scale squared (1).
  const arma::mat gram = result.factor.r.t() * result.factor.r;
  EXPECT_NEAR(gram(0, 0), 6.0, 6.0 * 1e-14);
  // (age, age): sum w age^2 = 1*100 + 2*400 + 3*1600 = 5700, age scale 2^-5 (bound 40).
  EXPECT_NEAR(gram(1, 1), 5700.0 * std::ldexp(1.0, -10), 1e-12);
}

TEST(RowAccountingTest, DropsAreKeptByReasonThenColumnWhateverTheOrderSeen) {
  RowAccounting accounting;
  accounting.CountDropped(DropReason::kZeroWeight, "units");
  accounting.CountDropped(DropReason::kMissing, "price");
  accounting.CountDropped(DropReason::kMissing, "age");
  accounting.CountDropped(DropReason::kMissing, "price");
  accounting.CountDropped(DropReason::kZeroWeight, "units");
  const std::vector<RowDrop> expected = {{DropReason::kMissing, "age", 1},
                                         {DropReason::kMissing, "price", 2},
                                         {DropReason::kZeroWeight, "units", 2}};
  EXPECT_EQ(accounting.rows_dropped, expected);
  EXPECT_EQ(accounting.RowsDroppedTotal(), 5u);
  EXPECT_STREQ(ToString(DropReason::kMissing), "missing");
  EXPECT_STREQ(ToString(DropReason::kZeroWeight), "zero weight");
}

TEST(DataPassTest, TheScanFingerprintsTheWholeFileForAnyThreadCount) {
  TempDir folder;
  const auto path = folder.Write("laptops.csv", kLaptops);
  DataFingerprint whole;
  whole.Update(kLaptops);
  const std::string expected = whole.Finish();
  for (int threads : {1, 2, 3}) {
    ScanOptions options;
    options.threads = threads;
    options.min_range_bytes = 1;
    const ScanResult scan = ScanData(path, options);
    EXPECT_EQ(scan.sha256, expected) << threads << " threads";
    EXPECT_EQ(scan.stored_bytes, std::string_view(kLaptops).size());
    EXPECT_EQ(scan.ranges, threads);
  }
}

TEST(DataPassTest, ThreadCountsGiveTheSameFactorAndAccounting) {
  TempDir folder;
  const Generated data = Generate(5000);
  const auto path = folder.Write("generated.csv", data.text);
  const Design design = BuildDesign(GeneratedSpec(), ProfileCsv(path, CsvOptions{}));
  ASSERT_EQ(design.column_count(), 1 + 1 + 1 + 3 + 1 + 3);

  PassOptions options;
  options.block_rows = 37;  // many blocks, not a divisor of the row count
  std::vector<PassResult> results;
  for (int threads : {1, 2, 3}) {
    options.threads = threads;
    results.push_back(RunFactorPass(path, design, options));
  }
  const RowAccounting& single = results[0].accounting;
  EXPECT_EQ(single.rows_read, data.rows);
  EXPECT_EQ(single.rows_used, data.used);
  const std::vector<RowDrop> dropped = {{DropReason::kMissing, "a", data.missing_a},
                                        {DropReason::kMissing, "y", data.missing_y},
                                        {DropReason::kZeroWeight, "w", data.zero_weight}};
  EXPECT_EQ(single.rows_dropped, dropped);
  for (std::size_t r = 1; r < results.size(); ++r) {
    const PassResult& other = results[r];
    EXPECT_EQ(other.accounting.rows_read, single.rows_read);
    EXPECT_EQ(other.accounting.rows_used, single.rows_used);
    EXPECT_EQ(other.accounting.rows_dropped, single.rows_dropped);
    EXPECT_EQ(other.factor.rows, results[0].factor.rows);
    EXPECT_NEAR(other.factor.weight_sum, results[0].factor.weight_sum,
                1e-12 * results[0].factor.weight_sum);
    // Common practice: different fold orders agree to rounding (far below 1e-12).
    EXPECT_LT(testing::ColumnRelativeDifference(other.factor.r, results[0].factor.r), 1e-12)
        << r + 1 << " threads";
  }
  // A given thread count gives the same bits every time.
  options.threads = 3;
  const PassResult again = RunFactorPass(path, design, options);
  EXPECT_TRUE(arma::approx_equal(again.factor.r, results[2].factor.r, "absdiff", 0.0));
}

// When the system refuses to start a thread (here: a limit of one process for the user, so that
// every std::thread fails with EAGAIN, as under a tight `ulimit -v` or `ulimit -u`), the scan and
// the factor pass run the parts that got no thread on the calling thread, say so in a notice,
// and give the very bits of the same thread count with threads (shares and merges are the
// same). Before, std::thread's exception ended the process through std::terminate (exit 134).
// The work runs in a child process (root ignores the limit, so the child becomes `nobody`).
TEST(DataPassTest, ARefusedThreadRunsItsShareOnTheCallingThread) {
  TempDir folder;
  const Generated data = Generate(20000);  // 5 spill chunks, about 1 MB
  const auto path = folder.Write("generated.csv", data.text);
  const auto spill_dir = folder.path() / "spill";
  std::filesystem::create_directory(spill_dir);
  std::filesystem::permissions(folder.path(), std::filesystem::perms::owner_all | std::filesystem::perms::group_read |
                                                  std::filesystem::perms::group_exec | std::filesystem::perms::others_read |
                                                  std::filesystem::perms::others_exec);
  std::filesystem::permissions(path, std::filesystem::perms::owner_read | std::filesystem::perms::owner_write |
                                         std::filesystem::perms::group_read | std::filesystem::perms::others_read);
  std::filesystem::permissions(spill_dir, std::filesystem::perms::all);

  ScanOptions scan_options;
  scan_options.threads = 3;
  scan_options.min_range_bytes = 1;
  scan_options.work_dir = spill_dir;
  const ScanResult expected_scan = ScanData(path, scan_options);
  ASSERT_EQ(expected_scan.ranges, 3);
  const Design design = BuildDesign(GeneratedSpec(), expected_scan.profile);
  PassOptions pass_options;
  pass_options.threads = 3;
  const PassResult expected = RunFactorPass(*expected_scan.spill, design, pass_options);

  const passwd* nobody = getpwnam("nobody");
  const pid_t child = fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    // Exit codes say which check failed: 10 setup, 11 scan, 12 pass, 13 notices, 14 exception.
    if (geteuid() == 0 && (nobody == nullptr || setgid(nobody->pw_gid) != 0 || setuid(nobody->pw_uid) != 0)) _exit(10);
    const rlimit one{1, 1};
    if (setrlimit(RLIMIT_NPROC, &one) != 0) _exit(10);
    std::vector<std::string> notices;
    SetNoticeSink([&notices](std::string_view line) { notices.emplace_back(line); });
    try {
      const ScanResult scan = ScanData(path, scan_options);
      if (scan.ranges != 3 || scan.sha256 != expected_scan.sha256 || scan.profile.rows != expected_scan.profile.rows) {
        _exit(11);
      }
      const PassResult pass = RunFactorPass(*scan.spill, design, pass_options);
      if (!arma::approx_equal(pass.factor.r, expected.factor.r, "absdiff", 0.0) ||
          pass.accounting.rows_used != expected.accounting.rows_used) {
        _exit(12);
      }
    } catch (...) {
      _exit(14);
    }
    const bool said = notices.size() == 2 && notices[0].find("reading the data runs 3 of its 3 parts on the calling thread") != std::string::npos &&
                      notices[1].find("the factor pass runs 3 of its 3 parts on the calling thread") != std::string::npos &&
                      notices[0].find("the system refused to start a thread (") == 0;
    _exit(said ? 0 : 13);
  }
  int status = 0;
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(120);
  while (waitpid(child, &status, WNOHANG) == 0) {
    if (std::chrono::steady_clock::now() > deadline) {
      kill(child, SIGKILL);
      waitpid(child, &status, 0);
      FAIL() << "the child did not finish within 120 s";
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  ASSERT_TRUE(WIFEXITED(status)) << "ended by signal " << (WIFSIGNALED(status) ? WTERMSIG(status) : 0);
  EXPECT_EQ(WEXITSTATUS(status), 0) << "10 setup, 11 scan, 12 factor pass, 13 notices, 14 exception";
}

// RequireSomethingToFit on passes made by hand: every branch, including a pass that read no row
// (RunPlan never gets there: a header alone leaves the response empty, a PlanError).
// PassCheckScope: the passes the thread runs call its check before each spill chunk (with the
// chunks of its share done and in all); a check that throws stops the pass with its error, for one
// thread and for several (the calling thread folds the last share and checks between its chunks;
// the other shares stop at their next chunk); out of the scope nothing is called.
TEST(DataPassTest, APassCheckSeesEveryChunkAndStopsThePassByThrowing) {
  TempDir folder;
  const Generated data = Generate(20000);  // 5 spill chunks
  const auto path = folder.Write("generated.csv", data.text);
  ScanOptions scan_options;
  scan_options.work_dir = folder.path();
  const ScanResult scan = ScanData(path, scan_options);
  ASSERT_EQ(scan.spill->chunk_count(), 5u);
  const Design design = BuildDesign(GeneratedSpec(), scan.profile);
  PassOptions options;
  const PassResult unchecked = RunFactorPass(*scan.spill, design, options);
  struct Stop {};
  for (int threads : {1, 3}) {
    options.threads = threads;
    std::vector<std::string> calls;
    {
      const PassCheckScope scope([&calls](const PassProgress& progress) {
        calls.push_back(std::string(progress.pass) + " " + std::to_string(progress.done) + "/" +
                        std::to_string(progress.total));
      });
      const PassResult checked = RunFactorPass(*scan.spill, design, options);
      EXPECT_TRUE(arma::approx_equal(checked.factor.r, unchecked.factor.r, "reldiff", 1e-12));
      ForEachUsedRow(*scan.spill, design, [](const UsedRow&) {});
    }
    // The calling thread's share: all 5 chunks with one thread, the last share (chunks 3 and 4 of
    // 0..4: 5 * 2 / 3 = 3 to 5) with three; each check before a chunk and one at the end. Then
    // the replay of all 5 chunks.
    const std::vector<std::string> expected_pass =
        threads == 1 ? std::vector<std::string>{"factor pass 0/5", "factor pass 1/5", "factor pass 2/5",
                                                "factor pass 3/5", "factor pass 4/5", "factor pass 5/5"}
                     : std::vector<std::string>{"factor pass 0/2", "factor pass 1/2", "factor pass 2/2"};
    std::vector<std::string> expected = expected_pass;
    for (int done = 0; done <= 5; ++done) expected.push_back("replay " + std::to_string(done) + "/5");
    EXPECT_EQ(calls, expected) << threads << " threads";

    const PassCheckScope stopping([](const PassProgress& progress) {
      if (progress.done == 1) throw Stop{};
    });
    EXPECT_THROW(RunFactorPass(*scan.spill, design, options), Stop) << threads << " threads";
    EXPECT_THROW(ForEachUsedRow(*scan.spill, design, [](const UsedRow&) {}), Stop);
  }
  // Out of every scope: no check.
  options.threads = 1;
  EXPECT_NO_THROW(RunFactorPass(*scan.spill, design, options));
}

TEST(DataPassTest, NothingToFitIsRefusedNamingWhy) {
  Design design;
  design.response = "price";
  design.intercept = true;
  auto message = [&](const PassResult& pass) {
    try {
      RequireSomethingToFit(pass, design, "d.csv");
    } catch (const InputError& error) {
      return std::string(error.what());
    }
    return std::string("(nothing thrown)");
  };
  PassResult pass;
  EXPECT_EQ(message(pass), "d.csv: the file has no data rows (a header alone): nothing to fit");
  pass.accounting.rows_read = 3;
  pass.accounting.CountDropped(DropReason::kZeroWeight, "w", 2);
  pass.accounting.CountDropped(DropReason::kMissing, "age", 1);
  EXPECT_EQ(message(pass).substr(0, 109),
            "d.csv: no row can be used: all 3 rows read were dropped (1 with a missing cell in column 'age', 2 with "
            "weight");
  // Used rows: the response's spread decides.
  pass.accounting.rows_used = 2;
  pass.factor.column_stats.resize(2);
  RunningStats& y = pass.factor.column_stats.back();
  y.Add(7);
  y.Add(7);
  EXPECT_NE(message(pass).find("d.csv: response 'price' is 7 in the 2 rows used: with an intercept"), std::string::npos)
      << message(pass);
  EXPECT_NE(message(pass).find("check the response column and the rows dropped (3 rows)"), std::string::npos)
      << message(pass);
  y = RunningStats{};
  y.Add(7);
  y.Add(std::nextafter(7.0, 8.0));  // the next double: rounding, not data
  EXPECT_NE(message(pass).find("only varies from 7 to 7.000000000000001 in the 2 rows used"), std::string::npos)
      << message(pass);
  y = RunningStats{};
  y.Add(7);
  y.Add(7 + 7 * 0x1p-39);  // beyond 2^-40 of the size: data
  EXPECT_EQ(message(pass), "(nothing thrown)");
  design.intercept = false;
  y = RunningStats{};
  y.Add(7);
  y.Add(7);
  EXPECT_EQ(message(pass), "(nothing thrown)");  // a model through the origin
  y = RunningStats{};
  y.Add(0);
  y.Add(0);
  EXPECT_NE(message(pass).find("response 'price' is 0 in the 2 rows used: there is nothing to fit"), std::string::npos)
      << message(pass);
}

TEST(DataPassTest, ForEachUsedRowSeesUsedRowsInOrder) {
  TempDir folder;
  const auto path = folder.Write("laptops.csv", kLaptops);
  const Design design = BuildDesign(LaptopSpec(), ProfileCsv(path, CsvOptions{}));
  std::vector<std::uint64_t> indices, lines;
  std::vector<std::vector<double>> xs;
  std::vector<double> ys, weights;
  ForEachUsedRow(path, design, CsvOptions{}, [&](const UsedRow& row) {
    indices.push_back(row.row_index);
    lines.push_back(row.line);
    xs.emplace_back(row.x.begin(), row.x.end());
    ys.push_back(row.y);
    weights.push_back(row.weight);
  });
  EXPECT_EQ(indices, (std::vector<std::uint64_t>{0, 1, 5}));
  EXPECT_EQ(lines, (std::vector<std::uint64_t>{2, 3, 7}));
  EXPECT_EQ(ys, (std::vector<double>{100, 200, 250}));
  EXPECT_EQ(weights, (std::vector<double>{1, 2, 3}));
  // intercept, age, grade=B, grade=C (baseline A, the most frequent).
  EXPECT_EQ(xs[1], (std::vector<double>{1, 20, 1, 0}));
  EXPECT_EQ(xs[2], (std::vector<double>{1, 40, 0, 0}));

  const RowReplay replay = FileRowReplay(path, design, CsvOptions{});
  std::vector<std::uint64_t> replayed;
  replay([&](const UsedRow& row) { replayed.push_back(row.row_index); });
  EXPECT_EQ(replayed, indices);
}

TEST(DataPassTest, ReplayCarriesTheLowOrderPartsOfPowers) {
  TempDir folder;
  const auto path = folder.Write("p.csv", "y,a\n1,1.1\n2,0.3\n3,7\n");
  DesignSpec spec;
  spec.response = "y";
  spec.terms = {testing::Numeric("a", "a")};
  spec.terms.push_back(testing::Power("a^3", "a", 3));
  const Design design = BuildDesign(spec, ProfileCsv(path, CsvOptions{}));
  std::vector<double> values = {1.1, 0.3, 7};
  std::size_t seen = 0;
  ForEachUsedRow(path, design, CsvOptions{}, [&](const UsedRow& row) {
    ASSERT_EQ(row.x_low.size(), design.column_count());
    const long double a = values[seen++];
    const long double exact = a * a * a;  // the same long double products as the design
    // x + x_low holds the long double power exactly (the difference has few significant bits).
    EXPECT_EQ(static_cast<long double>(row.x[2]) + static_cast<long double>(row.x_low[2]), exact);
    EXPECT_EQ(row.x_low[0], 0.0);
    EXPECT_EQ(row.x_low[1], 0.0);
  });
  EXPECT_EQ(seen, 3u);
  // 1.1^3 in long double is not a double: the low part of the first row is not zero.
  std::vector<double> first_low;
  ForEachUsedRow(path, design, CsvOptions{}, [&](const UsedRow& row) {
    if (row.row_index == 0) first_low.assign(row.x_low.begin(), row.x_low.end());
  });
  EXPECT_NE(first_low.at(2), 0.0);

  // Without a power, x_low is empty (all zero).
  DesignSpec linear = spec;
  linear.terms.pop_back();
  const Design linear_design = BuildDesign(linear, ProfileCsv(path, CsvOptions{}));
  ForEachUsedRow(path, linear_design, CsvOptions{},
                 [&](const UsedRow& row) { EXPECT_TRUE(row.x_low.empty()); });
}

TEST(DataPassTest, InputErrorsStopEveryThreadCount) {
  TempDir folder;
  Generated data = Generate(2000);
  const auto profiled = folder.Write("generated.csv", data.text);
  const Design design = BuildDesign(GeneratedSpec(), ProfileCsv(profiled, CsvOptions{}));
  // Same data with a negative weight near the end, after many blocks went to the workers.
  const std::size_t last_line_start = data.text.rfind('\n', data.text.size() - 2) + 1;
  const std::size_t weight_start = data.text.rfind(',') + 1;
  data.text.replace(weight_start, data.text.size() - 1 - weight_start, "-1");
  const auto broken = folder.Write("broken.csv", data.text);
  const std::string where = broken.string() + ":" + std::to_string(data.rows + 1) + ":" +
                            std::to_string(weight_start - last_line_start + 1);
  for (int threads : {1, 2, 3}) {
    PassOptions options;
    options.threads = threads;
    options.block_rows = 16;
    try {
      RunFactorPass(broken, design, options);
      ADD_FAILURE() << "expected an InputError with " << threads << " threads";
    } catch (const InputError& error) {
      EXPECT_NE(std::string(error.what()).find(where), std::string::npos) << error.what();
    }
  }
}

TEST(DataPassTest, OptionsAreChecked) {
  TempDir folder;
  const auto path = folder.Write("laptops.csv", kLaptops);
  const Design design = BuildDesign(LaptopSpec(), ProfileCsv(path, CsvOptions{}));
  PassOptions options;
  options.threads = 0;
  try {
    RunFactorPass(path, design, options);
    ADD_FAILURE() << "expected an InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("threads"), std::string::npos);
  }
}

}  // namespace
}  // namespace stepledger

// What validation costs: the factor pass with cross-validation folds against the plain pass, and
// selection by criterion cv against selection by BIC, end to end, on one generated numeric CSV.
//
//   validation_bench [--rows N] [--threads N] [--repeats N] [--keep]
//
// Defaults: 1,000,000 rows, 1 thread, 3 repeats. The data file (30 numeric columns: the
// response y and x1..x29; y depends on x1..x10 only) is written to the temporary folder as
// stepledger-validation-bench-<rows>.csv and removed afterwards unless --keep. It is scanned
// once into a spill (not counted in the passes); then, in one run, side by side:
//   (i)   RunFactorPass over the spill, PassOptions without folds (the plain pass);
//   (ii)  the same pass with 10 folds (one factor per fold, merged into the plain factor);
//   (iii) RunPlan, forward selection by criterion cv with 10 folds, from the file (scan, pass,
//         search, refinement, diagnostics, k-fold error of the final model);
//   (iv)  RunPlan, forward selection by BIC, the same way;
//   (v)   the factors of 200 Poisson bootstrap replicates from the spill (once);
//   (vi)  RunPlan, stepwise BIC with 200 bootstrap replicates, from the file (once).
// (i) and (ii) alternate for the given repeats and the fastest of each counts, so that a
// neighbour's load on a shared machine hurts both alike; (iii) and (iv) also alternate. The
// table gives seconds, rows per second and the ratio to the plain pass; the goal is (ii) at
// most 1.5 times (i), and (vi) under 60 s on 2 threads with memory flat in the rows (the peak
// resident size is printed at the end; run with --rows 100000 and 1000000 to compare).

#include <sys/resource.h>

#include <algorithm>
#include <charconv>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <functional>
#include <iostream>
#include <limits>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "generated_csv.h"
#include "stepledger/engine/bootstrap_pass.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/run/run_plan.h"

namespace {

constexpr int kColumns = 30;        // y and x1..x29
constexpr int kActiveColumns = 10;  // y depends on x1..x10
constexpr std::size_t kFolds = 10;
constexpr std::size_t kReplicates = 200;

using Clock = std::chrono::steady_clock;

const stepledger::bench::GeneratedCsv kShape{kColumns, kActiveColumns, 0.3, 4.0, 20261203};

void WriteCsv(const std::filesystem::path& path, std::uint64_t rows) {
  stepledger::bench::WriteGeneratedCsv(path, rows, kShape);
}

stepledger::DesignSpec MakeSpec() { return stepledger::bench::GeneratedCsvSpec(kShape); }

std::string PlanText(const char* criterion, const char* method = "forward", const std::string& extra = "") {
  std::string text = R"({"response": "y", "terms": [)";
  for (int j = 1; j < kColumns; ++j) {
    text += (j > 1 ? ", " : "") + std::string(R"({"name": "x)") + std::to_string(j) + R"(", "column": "x)" +
            std::to_string(j) + R"("})";
  }
  return text + R"(], "method": ")" + method + R"(", "criterion": ")" + criterion + R"(", "folds": )" +
         std::to_string(kFolds) + extra + "}";
}

double Seconds(const std::function<void()>& work) {
  const auto start = Clock::now();
  work();
  return std::chrono::duration<double>(Clock::now() - start).count();
}

// One line of the table.
struct BenchRow {
  std::string what;
  double seconds = 0;
  std::uint64_t rows = 0;  // data rows the work went through
  std::string note;
};

// What every timing works on.
struct BenchContext {
  std::filesystem::path data;
  std::uint64_t rows = 0;
  int threads = 1;
  int repeats = 1;
  const stepledger::Spill* spill = nullptr;
  const stepledger::Design* design = nullptr;
};

// ---- The bootstrap rows ------------------------------------------------------------------------
// 200 Poisson bootstrap replicates (engine/bootstrap_pass.h): their factors alone from the spill,
// then stepwise BIC with the bootstrap end to end through RunPlan (scan, pass, search, fit,
// diagnostics, the replicates' factors and selections). Once each: a run takes long enough.
void AddBootstrapRows(const BenchContext& context, std::vector<BenchRow>& rows) {
  stepledger::BootstrapPassOptions options;
  options.settings = {kReplicates, 11};
  options.threads = context.threads;
  std::size_t factors = 0;
  const double factor_seconds = Seconds([&] {
    factors = stepledger::BuildBootstrapFactors(*context.spill, *context.design, options).size();
  });
  if (factors != kReplicates) std::abort();
  rows.push_back({"(v) 200 bootstrap replicates' factors", factor_seconds, context.rows, "one read of the spill"});

  const stepledger::LoadedPlan plan = stepledger::ParsePlanText(
      PlanText("bic", "stepwise", R"(, "bootstrap": {"replicates": 200, "seed": 11})"));
  stepledger::RunOptions run_options;
  run_options.threads = context.threads;
  std::optional<stepledger::BootstrapValidation> bootstrap;
  const double run_seconds = Seconds([&] {
    bootstrap = stepledger::RunPlan(context.data, plan, run_options).validation.bootstrap;
  });
  if (!bootstrap) std::abort();
  rows.push_back({"(vi) RunPlan stepwise BIC + 200 replicates", run_seconds, context.rows,
                  std::string("goal: under 60 s on 2 threads; ") + (run_seconds < 60 ? "met" : "NOT met") +
                      "; scan included"});
}
// -------------------------------------------------------------------------------------------------

}  // namespace

int main(int argc, char** argv) {
  std::uint64_t row_count = 1'000'000;
  int threads = 1, repeats = 3;
  bool keep = false;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--rows" && i + 1 < argc) {
      row_count = std::strtoull(argv[++i], nullptr, 10);
    } else if (arg == "--threads" && i + 1 < argc) {
      threads = std::atoi(argv[++i]);
    } else if (arg == "--repeats" && i + 1 < argc) {
      repeats = std::atoi(argv[++i]);
    } else if (arg == "--keep") {
      keep = true;
    } else {
      std::cerr << "usage: validation_bench [--rows N] [--threads N] [--repeats N] [--keep]\n";
      return 2;
    }
  }
  if (row_count < 100 || threads < 1 || repeats < 1) {
    std::cerr << "validation_bench: --rows must be at least 100, --threads and --repeats at least 1\n";
    return 2;
  }

  const std::filesystem::path data = std::filesystem::temp_directory_path() /
                                     ("stepledger-validation-bench-" + std::to_string(row_count) + ".csv");
  if (!std::filesystem::exists(data)) WriteCsv(data, row_count);
  const double megabytes = static_cast<double>(std::filesystem::file_size(data)) / 1e6;

  stepledger::ScanOptions scan_options;
  scan_options.threads = threads;
  stepledger::ScanResult scan;
  const double scan_seconds = Seconds([&] { scan = stepledger::ScanData(data, scan_options); });
  const stepledger::Design design = stepledger::BuildDesign(MakeSpec(), scan.profile);

  BenchContext context;
  context.data = data;
  context.rows = row_count;
  context.threads = threads;
  context.repeats = repeats;
  context.spill = scan.spill.get();
  context.design = &design;

  // (i) and (ii), alternating; the fastest of each.
  stepledger::PassOptions plain;
  plain.threads = threads;
  stepledger::PassOptions folded = plain;
  folded.folds = stepledger::FoldSettings{kFolds, 1};
  double plain_seconds = std::numeric_limits<double>::infinity();
  double folded_seconds = plain_seconds;
  std::uint64_t rows_used = 0;
  for (int r = 0; r < repeats; ++r) {
    plain_seconds = std::min(plain_seconds, Seconds([&] {
                               rows_used = stepledger::RunFactorPass(*scan.spill, design, plain).accounting.rows_used;
                             }));
    folded_seconds = std::min(folded_seconds, Seconds([&] {
                                const stepledger::PassResult pass = stepledger::RunFactorPass(*scan.spill, design, folded);
                                if (pass.fold_factors.size() != kFolds) std::abort();
                              }));
  }

  // (iii) and (iv), alternating; the fastest of each.
  const stepledger::LoadedPlan cv_plan = stepledger::ParsePlanText(PlanText("cv"));
  const stepledger::LoadedPlan bic_plan = stepledger::ParsePlanText(PlanText("bic"));
  stepledger::RunOptions run_options;
  run_options.threads = threads;
  double cv_seconds = std::numeric_limits<double>::infinity();
  double bic_seconds = cv_seconds;
  std::size_t cv_terms = 0, bic_terms = 0;
  for (int r = 0; r < repeats; ++r) {
    cv_seconds = std::min(cv_seconds, Seconds([&] {
                            cv_terms = stepledger::RunPlan(data, cv_plan, run_options).fit.terms.size();
                          }));
    bic_seconds = std::min(bic_seconds, Seconds([&] {
                             bic_terms = stepledger::RunPlan(data, bic_plan, run_options).fit.terms.size();
                           }));
  }

  std::vector<BenchRow> rows = {
      {"scan into the spill (parse once)", scan_seconds, row_count, "not part of the passes below"},
      {"(i) factor pass, no folds", plain_seconds, row_count, "the reference"},
      {"(ii) factor pass, 10 folds", folded_seconds, row_count, "goal: at most 1.5x (i)"},
      {"(iii) RunPlan forward, criterion cv, 10 folds", cv_seconds, row_count,
       std::to_string(cv_terms) + " terms chosen; scan included"},
      {"(iv) RunPlan forward, BIC", bic_seconds, row_count,
       std::to_string(bic_terms) + " terms chosen; scan included"},
  };
  AddBootstrapRows(context, rows);

  std::printf("validation cost: %llu rows (%llu used) x %d numeric columns, %.0f MB, %d thread(s), "
              "fastest of %d\n\n",
              static_cast<unsigned long long>(row_count), static_cast<unsigned long long>(rows_used), kColumns,
              megabytes, threads, repeats);
  std::printf("| work | seconds | rows/s | x (i) | note |\n");
  std::printf("| :--- | ---: | ---: | ---: | :--- |\n");
  for (const BenchRow& row : rows) {
    std::printf("| %s | %.3f | %.0f | %.2f | %s |\n", row.what.c_str(), row.seconds,
                static_cast<double>(row.rows) / row.seconds, row.seconds / plain_seconds, row.note.c_str());
  }
  const double ratio = folded_seconds / plain_seconds;
  std::printf("\nGoal: the pass with 10 folds at most 1.5x the plain pass: %.2fx, %s.\n", ratio,
              ratio <= 1.5 ? "met" : "NOT met");
  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  std::printf("Peak resident size of this run: %.0f MB (ru_maxrss).\n", static_cast<double>(usage.ru_maxrss) / 1024);
  if (!keep) std::filesystem::remove(data);
  return 0;
}

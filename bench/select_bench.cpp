// Selection benchmark (prints a table; not a test).
//
// 1. Forward selection, 30 steps over 300 candidate columns: the kernel on the factor (time
//    after the data pass) beside a baseline in the same run that refits every candidate model
//    from the rows with LAPACK least squares (Armadillo solve, no_approx: dgels). The
//    baseline follows the kernel's route; it is measured in full at the first and the last
//    step only, and the steps between are interpolated by its cost model a*w + b*w^2 per
//    candidate (w: model width), and the output says so. Run at 50,000 and 200,000 rows: the kernel's time
//    does not depend on the rows.
// 2. All subsets, best 3 per size, m = 20 to 50 correlated terms: the regression tree on 1 and
//    2 threads beside the earlier drop tree (m <= 35) and the exhaustive Gray-code enumeration
//    (m <= 24) in the same run; nodes per model kept, which does not depend on the machine.
// Invented data (a seeded generator); nothing is read from disk.

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <random>
#include <string>
#include <vector>

#include <armadillo>

#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/selection/search.h"

namespace {

using Clock = std::chrono::steady_clock;
using stepledger::Design;

double Seconds(Clock::time_point since) {
  return std::chrono::duration<double>(Clock::now() - since).count();
}

Design OneColumnTerms(std::size_t m) {
  Design design;
  design.response = "y";
  design.columns.push_back({"intercept", stepledger::kNoTerm, 1.0});
  for (std::size_t j = 0; j < m; ++j) {
    stepledger::DesignTerm term;
    term.name = "x" + std::to_string(j + 1);
    term.first_column = design.columns.size();
    term.column_count = 1;
    design.columns.push_back({term.name, j, 1.0});
    design.terms.push_back(term);
  }
  return design;
}

/// Rows with neighbouring columns correlated (AR(1), rho) and y built from `active` terms.
void MakeRows(std::size_t n, std::size_t m, double rho, std::size_t active, std::uint64_t seed,
              arma::mat& x, arma::vec& y) {
  std::mt19937_64 engine(seed);
  std::normal_distribution<double> normal;
  x.set_size(n, m + 1);
  y.set_size(n);
  const double innovation = std::sqrt(1 - rho * rho);
  for (std::size_t i = 0; i < n; ++i) {
    x(i, 0) = 1;
    double previous = normal(engine);
    double signal = 0;
    for (std::size_t j = 0; j < m; ++j) {
      const double value = j == 0 ? previous : rho * previous + innovation * normal(engine);
      previous = value;
      x(i, j + 1) = value;
      if (j % (m / active) == 0) signal += (0.02 + 0.01 * static_cast<double>(j % 7)) * value;
    }
    y(i) = signal + normal(engine);
  }
}

stepledger::Factor Fold(const arma::mat& x, const arma::vec& y, const Design& design) {
  stepledger::FactorBuilder builder(design.scales(), 256);
  std::vector<double> row(x.n_cols);
  for (arma::uword i = 0; i < x.n_rows; ++i) {
    for (arma::uword j = 0; j < x.n_cols; ++j) row[j] = x(i, j);
    builder.AddRow(row, y(i), 1.0);
  }
  return builder.Finish();
}

double RefitRss(const arma::mat& x, const arma::vec& y, const std::vector<arma::uword>& columns) {
  const arma::mat xs = x.cols(arma::uvec(columns));
  arma::vec beta;
  if (!arma::solve(beta, xs, y, arma::solve_opts::no_approx)) return NAN;
  return arma::accu(arma::square(y - xs * beta));
}

void ForwardBenchmark(std::size_t n, std::size_t m, std::size_t steps, std::size_t baseline_steps) {
  arma::mat x;
  arma::vec y;
  MakeRows(n, m, 0.5, 60, 20261201, x, y);
  const Design design = OneColumnTerms(m);
  auto start = Clock::now();
  const stepledger::Factor factor = Fold(x, y, design);
  const double pass_seconds = Seconds(start);

  stepledger::SearchOptions options;
  options.method = stepledger::Method::kForward;
  options.criterion = stepledger::Criterion::kAic;
  options.max_terms = steps;
  start = Clock::now();
  const stepledger::SearchResult result = stepledger::RunSearch(factor, design, options);
  const double kernel_seconds = Seconds(start);
  const std::size_t moves = result.final_term_indices.size();

  // Baseline: the same route, every candidate refitted from the rows. Measured in full at the
  // first and the last step; per candidate the cost is a*w + b*w^2 for model width w (copying
  // the columns, then dgels), fitted through those two steps and summed over the others.
  std::vector<arma::uword> model{0};
  std::vector<std::vector<arma::uword>> models;
  for (std::size_t step = 0; step < moves; ++step) {
    models.push_back(model);
    model.push_back(result.final_term_indices[step] + 1);
  }
  auto sweep = [&](const std::vector<arma::uword>& current) {
    const auto begin = Clock::now();
    std::size_t fits = 0;
    for (std::size_t term = 0; term < m; ++term) {
      const arma::uword column = term + 1;
      if (std::find(current.begin(), current.end(), column) != current.end()) continue;
      std::vector<arma::uword> candidate = current;
      candidate.push_back(column);
      volatile double rss = RefitRss(x, y, candidate);
      (void)rss;
      ++fits;
    }
    return Seconds(begin) / static_cast<double>(fits);
  };
  const double w1 = static_cast<double>(models.front().size() + 1);
  const double w2 = static_cast<double>(models.back().size() + 1);
  const double t1 = sweep(models.front());
  const double t2 = sweep(models.back());
  // Solve a*w1 + b*w1^2 = t1, a*w2 + b*w2^2 = t2.
  const double b = std::max(0.0, (t2 / w2 - t1 / w1) / (w2 - w1));
  const double a = std::max(0.0, t1 / w1 - b * w1);
  double baseline_seconds = 0;
  for (std::size_t step = 0; step < moves; ++step) {
    const double w = static_cast<double>(models[step].size() + 1);
    baseline_seconds += static_cast<double>(m - step) * (a * w + b * w * w);
  }
  const double measured = t1 * static_cast<double>(m) + t2 * static_cast<double>(m - moves + 1);
  std::printf("%8zu  %5zu  %5zu  %9.2f  %10.4f  %12.2f  %9.0fx  %s\n", n, m, moves, pass_seconds,
              kernel_seconds, baseline_seconds, baseline_seconds / kernel_seconds,
              ("baseline measured at steps 1 and " + std::to_string(moves) + " (" +
               std::to_string(measured).substr(0, 6) + " s), the others interpolated by a*w + b*w^2")
                  .c_str());
  (void)baseline_steps;
}

struct SubsetRun {
  stepledger::SearchResult result;
  double seconds = 0;
};

SubsetRun RunSubsets(const stepledger::Factor& factor, const Design& design,
                     const stepledger::SearchOptions& options, const stepledger::SearchRunOptions& run) {
  const auto start = Clock::now();
  SubsetRun out{stepledger::RunSearch(factor, design, options, nullptr, run), 0};
  out.seconds = Seconds(start);
  return out;
}

bool SameSubsets(const stepledger::SearchResult& a, const stepledger::SearchResult& b) {
  if (a.subsets.size() != b.subsets.size()) return false;
  for (std::size_t i = 0; i < a.subsets.size(); ++i) {
    if (a.subsets[i].terms != b.subsets[i].terms) return false;
  }
  return true;
}

/// Seconds of another algorithm on the same search, or "not run" when `run_it` is false; `same`
/// turns false when its kept subsets differ from `reference`'s.
std::string TimedBeside(bool run_it, const stepledger::Factor& factor, const Design& design,
                        const stepledger::SearchOptions& options, const stepledger::SearchRunOptions& run,
                        const stepledger::SearchResult& reference, bool& same) {
  if (!run_it) return "not run";
  const SubsetRun other = RunSubsets(factor, design, options, run);
  same = same && SameSubsets(reference, other.result);
  return std::to_string(other.seconds).substr(0, 7) + " s";
}

stepledger::SearchRunOptions DropTree() {
  stepledger::SearchRunOptions run;
  run.drop_tree_subsets = true;
  return run;
}

stepledger::SearchRunOptions Exhaustive() {
  stepledger::SearchRunOptions run;
  run.exhaustive_subsets = true;
  return run;
}

/// The all-subsets search of the tables: best 3 per size by RSS, BIC.
stepledger::SearchOptions SubsetOptions() {
  stepledger::SearchOptions options;
  options.method = stepledger::Method::kAllSubsets;
  options.criterion = stepledger::Criterion::kBic;
  options.best_per_size = 3;
  return options;
}

/// Correlated terms (rho 0.6) of mixed strength, 2000 rows; a quarter of them in the true model.
stepledger::Factor CorrelatedFactor(std::size_t m, const Design& design) {
  arma::mat x;
  arma::vec y;
  MakeRows(2000, m, 0.6, std::max<std::size_t>(2, m / 4), 777 + m, x, y);
  return Fold(x, y, design);
}

/// Uncorrelated terms of a similar small effect, 1000 rows: little can be cut.
stepledger::Factor WeakFactor(std::size_t m, const Design& design) {
  arma::mat x;
  arma::vec y;
  MakeRows(1000, m, 0.0, m, 555 + m, x, y);
  return Fold(x, y, design);
}

void SubsetBenchmark(std::size_t m) {
  const Design design = OneColumnTerms(m);
  const stepledger::Factor factor = CorrelatedFactor(m, design);
  const stepledger::SearchOptions options = SubsetOptions();
  stepledger::SearchRunOptions run;
  const SubsetRun one = RunSubsets(factor, design, options, run);
  run.threads = 2;
  const SubsetRun two = RunSubsets(factor, design, options, run);
  bool same = SameSubsets(one.result, two.result);
  const std::string drop_text = TimedBeside(m <= 35, factor, design, options, DropTree(), one.result, same);
  const std::string exhaustive_text = TimedBeside(m <= 24, factor, design, options, Exhaustive(), one.result, same);
  const double kept = static_cast<double>(one.result.subsets.size());
  std::printf("%4zu  %9.3f  %9.3f  %10zu  %12zu  %10.1f  %12s  %12s  %s\n", m, one.seconds, two.seconds,
              one.result.subset_nodes, one.result.subsets_evaluated,
              static_cast<double>(one.result.subset_nodes) / kept, drop_text.c_str(), exhaustive_text.c_str(),
              same ? "yes" : "NO");
}

/// The worst case: every term of a similar small effect, uncorrelated (little can be cut).
/// Returns the tree's seconds on one thread.
double WeakBenchmark(std::size_t m) {
  const Design design = OneColumnTerms(m);
  const stepledger::Factor factor = WeakFactor(m, design);
  const stepledger::SearchOptions options = SubsetOptions();
  const SubsetRun one = RunSubsets(factor, design, options, {});
  bool same = true;
  const std::string drop_text = TimedBeside(m <= 28, factor, design, options, DropTree(), one.result, same);
  std::printf("%4zu  %9.3f  %10zu  %12zu  %12s  %s\n", m, one.seconds, one.result.subset_nodes,
              one.result.subsets_evaluated, drop_text.c_str(), same ? "yes" : "NO");
  return one.seconds;
}

/// The tolerance: seconds and nodes of exact and tolerance searches (1 thread, as a tolerance
/// search always runs), and the largest ratio of a listed RSS to the exact one of its rank.
/// An exact search is run only where `exact_too`; returns the slowest tolerance search's seconds.
double ToleranceBenchmark(const char* data, std::size_t m, bool exact_too) {
  const Design design = OneColumnTerms(m);
  const stepledger::Factor factor = data[0] == 'c' ? CorrelatedFactor(m, design) : WeakFactor(m, design);
  stepledger::SearchOptions options = SubsetOptions();
  SubsetRun exact;
  if (exact_too) exact = RunSubsets(factor, design, options, {});
  std::printf("%-10s  %4zu  %12s  %12s", data, m,
              exact_too ? (std::to_string(exact.seconds).substr(0, 7) + " s").c_str() : "not run",
              exact_too ? std::to_string(exact.result.subset_nodes).c_str() : "-");
  double slowest = 0;
  for (double tau : {0.001, 0.01}) {
    options.subset_tolerance = tau;
    const SubsetRun within = RunSubsets(factor, design, options, {});
    slowest = std::max(slowest, within.seconds);
    double worst_ratio = 0;
    if (exact_too && exact.result.subsets.size() == within.result.subsets.size()) {
      for (std::size_t i = 0; i < within.result.subsets.size(); ++i) {
        worst_ratio = std::max(worst_ratio, within.result.subsets[i].rss / exact.result.subsets[i].rss);
      }
    }
    std::printf("  %10.3f s  %12zu  %9s", within.seconds, within.result.subset_nodes,
                exact_too ? std::to_string(worst_ratio).substr(0, 8).c_str() : "-");
  }
  std::printf("\n");
  return slowest;
}

}  // namespace

int main(int argc, char** argv) {
  // "subsets": the all-subsets table only.
  const bool subsets_only = argc > 1 && std::string(argv[1]) == "subsets";
  if (!subsets_only) {
  std::printf("Forward selection to 30 steps over 300 candidate columns (AIC, max_terms 30)\n");
  std::printf("%8s  %5s  %5s  %9s  %10s  %12s  %10s  %s\n", "rows", "m", "steps", "pass s",
              "kernel s", "refit s", "ratio", "note");
  ForwardBenchmark(50000, 300, 30, 3);
  ForwardBenchmark(200000, 300, 30, 2);
  std::printf("(pass s: one pass folding the rows into the factor; kernel s: the search after it)\n\n");
  }

  std::printf("All subsets, best 3 per size, correlated terms (rho 0.6), 2000 rows\n");
  std::printf("%4s  %9s  %9s  %10s  %12s  %10s  %12s  %12s  %s\n", "m", "tree 1 th", "tree 2 th", "nodes",
              "models read", "nodes/kept", "drop tree", "exhaustive", "same");
  for (std::size_t m : {20, 25, 30, 35, 40, 45, 50}) SubsetBenchmark(m);
  std::printf("(tree: the regression tree with preordering, seconds on 1 and 2 threads; nodes and models\n"
              " read on 1 thread; drop tree: the earlier branch and bound, 1 thread, m <= 35; exhaustive:\n"
              " Gray-code enumeration, m <= 24; same: the kept subsets agree across all that ran)\n");
  std::printf("\nAll subsets, worst case: every term of a similar small effect, uncorrelated, 1000 rows\n");
  std::printf("%4s  %9s  %10s  %12s  %12s  %s\n", "m", "tree 1 th", "nodes", "models read", "drop tree", "same");
  for (std::size_t m = 24; m <= 44; m += 4) {
    // Four more candidates cost about ten times as much here: stop before a run of minutes.
    if (WeakBenchmark(m) * 10 > 60) break;
  }
  std::printf("\nAll subsets with a subset_tolerance, 1 thread (a tolerance search runs on one)\n");
  std::printf("%-10s  %4s  %14s  %12s  %12s  %12s  %9s  %12s  %12s  %9s\n", "data", "m", "exact", "nodes",
              "tau 0.001", "nodes", "max ratio", "tau 0.01", "nodes", "max ratio");
  for (std::size_t m : {40, 50, 55, 60}) {
    if (ToleranceBenchmark("correlated", m, m <= 50) > 60) break;
  }
  for (std::size_t m : {36, 40, 44, 48, 52}) {
    if (ToleranceBenchmark("weak", m, m <= 40) > 30) break;
  }
  std::printf("(exact: the tolerance 0 search, where it runs in reasonable time; max ratio: the largest\n"
              " RSS of a listed model over that of the exact model of its size and rank, at most 1 + tau)\n");
  return 0;
}

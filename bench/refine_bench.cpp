// Refinement of the final fit against the rows, before and after the blocked kernel, on rows
// held in memory (an in-memory RowReplay: no parsing, so the table shows the arithmetic).
//
//   refine_bench [--rows N]   (default 1 000 000 rows; 20 predictors and the intercept)
//
// Two designs of invented data: "well-conditioned" (x_j = j + noise) and "collinear" (the same
// with x20 = x1 + 1e-6 noise, so that the factor's inverse is not trusted and the first pass
// also sums the Gram matrix). For each, in one run:
//   replay only   a pass that visits every row and does nothing (the RowReplay's own cost);
//   old kernel    the refinement as it was (one row at a time in double-double, the Gram in
//                 the first pass, a second pass to see the correction below 1e-15), kept here
//                 as the reference: seconds per pass and in all;
//   new           FitModel with refinement minus FitModel without (the refinement alone):
//                 passes, why it stopped, seconds.

#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include <armadillo>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/fit.h"

namespace {

using Clock = std::chrono::steady_clock;
constexpr std::size_t kPredictors = 20;
constexpr std::size_t kColumns = kPredictors + 1;  // intercept first

double Seconds(Clock::time_point start) { return std::chrono::duration<double>(Clock::now() - start).count(); }

struct Data {
  std::vector<double> x;  // row-major, kColumns per row
  std::vector<double> y;
  std::vector<double> scales;  // per column then y
};

Data MakeData(std::uint64_t rows, bool collinear) {
  Data data;
  data.x.resize(rows * kColumns);
  data.y.resize(rows);
  std::mt19937_64 engine(20261202);
  auto uniform = [&engine] { return static_cast<double>(engine() >> 11) * 0x1.0p-53; };
  std::vector<double> largest(kColumns + 1, 0.0);
  for (std::uint64_t i = 0; i < rows; ++i) {
    double* x = &data.x[i * kColumns];
    x[0] = 1;
    double y = 2;
    for (std::size_t j = 1; j <= kPredictors; ++j) {
      x[j] = (uniform() + uniform() + uniform() - 1.5) * 2.0 + static_cast<double>(j);
      if (collinear && j == kPredictors) x[j] = x[1] + 1e-6 * (uniform() - 0.5);
      y += 0.1 * static_cast<double>(j) * x[j];
    }
    data.y[i] = y + uniform() - 0.5;
    for (std::size_t j = 0; j < kColumns; ++j) largest[j] = std::max(largest[j], std::abs(x[j]));
    largest[kColumns] = std::max(largest[kColumns], std::abs(data.y[i]));
  }
  for (double value : largest) data.scales.push_back(value > 0 ? std::exp2(-std::round(std::log2(value))) : 1.0);
  return data;
}

stepledger::Design MakeDesign(const Data& data) {
  stepledger::Design design;
  design.response = "y";
  design.intercept = true;
  design.columns.push_back({"intercept", stepledger::kNoTerm, data.scales[0]});
  for (std::size_t j = 1; j <= kPredictors; ++j) {
    stepledger::DesignTerm term;
    term.name = "x" + std::to_string(j);
    term.first_column = design.columns.size();
    term.column_count = 1;
    term.source_column = term.name;
    design.columns.push_back({term.name, design.terms.size(), data.scales[j]});
    design.terms.push_back(term);
  }
  design.response_scale = data.scales.back();
  return design;
}

stepledger::RowReplay MemoryReplay(const Data& data) {
  return [&data](const std::function<void(const stepledger::UsedRow&)>& visit) {
    const std::uint64_t rows = data.y.size();
    for (std::uint64_t i = 0; i < rows; ++i) {
      stepledger::UsedRow row;
      row.row_index = i;
      row.line = i + 2;
      row.x = std::span<const double>(&data.x[i * kColumns], kColumns);
      row.y = data.y[i];
      visit(row);
    }
  };
}

// ---- the old kernel, kept as the reference --------------------------------------------------
struct DD {
  double hi = 0, lo = 0;
  double value() const { return hi + lo; }
};
DD TwoSum(double a, double b) {
  const double s = a + b;
  const double bb = s - a;
  return {s, (a - (s - bb)) + (b - bb)};
}
DD QuickTwoSum(double a, double b) {
  const double s = a + b;
  return {s, b - (s - a)};
}
DD TwoProduct(double a, double b) {
  const double p = a * b;
  return {p, std::fma(a, b, -p)};
}
DD operator+(DD a, DD b) {
  DD s = TwoSum(a.hi, b.hi);
  const DD t = TwoSum(a.lo, b.lo);
  s.lo += t.hi;
  s = QuickTwoSum(s.hi, s.lo);
  s.lo += t.lo;
  return QuickTwoSum(s.hi, s.lo);
}
DD operator-(DD a) { return {-a.hi, -a.lo}; }
DD operator*(DD a, double b) {
  DD p = TwoProduct(a.hi, b);
  p.lo += a.lo * b;
  return QuickTwoSum(p.hi, p.lo);
}
DD operator*(DD a, DD b) {
  DD p = TwoProduct(a.hi, b.hi);
  p.lo += a.hi * b.lo + a.lo * b.hi;
  return QuickTwoSum(p.hi, p.lo);
}

struct OldTiming {
  std::vector<double> pass_seconds;
  double total = 0;
};

// The old RefineEstimates loop (scaled units; no intercept shift bookkeeping beyond the sums).
OldTiming RunOldKernel(const Data& data, const stepledger::FitResult& factor_fit, const stepledger::RowReplay& replay) {
  const std::size_t k = factor_fit.k;
  const double y_scale = factor_fit.model_scales.back();
  arma::vec beta(k);
  for (std::size_t j = 0; j < k; ++j) beta(j) = factor_fit.beta(j) * y_scale / factor_fit.model_scales[j];
  std::vector<DD> gram(k * k), x(k);
  DD weight_sum, shifted_sum, shifted_squares;
  OldTiming timing;
  const auto all_start = Clock::now();
  double previous = std::numeric_limits<double>::infinity();
  for (int pass = 1; pass <= 10; ++pass) {
    const auto start = Clock::now();
    const bool first = pass == 1;
    std::vector<DD> gradient(k);
    DD rss;
    replay([&](const stepledger::UsedRow& row) {
      for (std::size_t j = 0; j < k; ++j) x[j] = {row.x[factor_fit.columns[j]] * factor_fit.model_scales[j], 0.0};
      const double y = row.y * y_scale;
      DD fitted;
      for (std::size_t j = 0; j < k; ++j) fitted = fitted + x[j] * beta(j);
      const DD residual = DD{y, 0} + (-fitted);
      const DD weighted_residual = residual * row.weight;
      rss = rss + weighted_residual * residual;
      for (std::size_t j = 0; j < k; ++j) gradient[j] = gradient[j] + weighted_residual * x[j];
      if (first) {
        for (std::size_t i = 0; i < k; ++i) {
          const DD weighted_x = x[i] * row.weight;
          for (std::size_t j = i; j < k; ++j) gram[i * k + j] = gram[i * k + j] + weighted_x * x[j];
        }
        const DD centred = TwoSum(y, 0.0);
        const DD weighted_centred = centred * row.weight;
        weight_sum = weight_sum + DD{row.weight, 0};
        shifted_sum = shifted_sum + weighted_centred;
        shifted_squares = shifted_squares + weighted_centred * centred;
      }
    });
    arma::vec delta(k);
    for (std::size_t j = 0; j < k; ++j) delta(j) = gradient[j].value();
    const arma::mat& r = factor_fit.model_triangle;
    delta = arma::solve(arma::trimatu(r), arma::solve(arma::trimatl(r.t()), delta));
    double correction = 0;
    for (std::size_t j = 0; j < k; ++j) {
      const double size = std::max(std::abs(beta(j)), std::abs(beta(j) + delta(j)));
      if (size > 0) correction = std::max(correction, std::abs(delta(j)) / size);
    }
    timing.pass_seconds.push_back(Seconds(start));
    if (pass > 1 && correction > previous) break;
    beta += delta;
    previous = correction;
    if (correction < 1e-15) break;
  }
  timing.total = Seconds(all_start);
  (void)data;
  return timing;
}

}  // namespace

int main(int argc, char** argv) {
  std::uint64_t rows = 1'000'000;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--rows" && i + 1 < argc) {
      rows = std::strtoull(argv[++i], nullptr, 10);
    } else {
      std::fprintf(stderr, "usage: refine_bench [--rows N]\n");
      return 2;
    }
  }
  std::printf("refinement of the final fit: %llu rows in memory, %zu predictors and the intercept\n\n",
              static_cast<unsigned long long>(rows), kPredictors);
  std::printf("| design | rcond | replay only s | old passes | old s per pass | old s | new passes | new stop | Gram pass | new s | old/new |\n");
  std::printf("| --- | ---: | ---: | ---: | --- | ---: | ---: | --- | --- | ---: | ---: |\n");
  for (const bool collinear : {false, true}) {
    const Data data = MakeData(rows, collinear);
    const stepledger::Design design = MakeDesign(data);
    stepledger::FactorBuilder builder(design.scales());
    for (std::uint64_t i = 0; i < rows; ++i) {
      builder.AddRow(std::span<const double>(&data.x[i * kColumns], kColumns), data.y[i], 1.0);
    }
    const stepledger::Factor factor = builder.Finish();
    const stepledger::RowReplay replay = MemoryReplay(data);
    std::vector<std::size_t> terms(design.terms.size());
    for (std::size_t t = 0; t < terms.size(); ++t) terms[t] = t;

    auto start = Clock::now();
    double checksum = 0;
    replay([&checksum](const stepledger::UsedRow& row) { checksum += row.y; });
    const double replay_seconds = Seconds(start);

    stepledger::FitOptions unrefined;
    unrefined.max_refinement_passes = 0;
    start = Clock::now();
    const stepledger::FitResult factor_fit = stepledger::FitModel(factor, design, terms, unrefined, &replay);
    const double factor_seconds = Seconds(start);

    const OldTiming old = RunOldKernel(data, factor_fit, replay);

    start = Clock::now();
    const stepledger::FitResult fit = stepledger::FitModel(factor, design, terms, stepledger::FitOptions{}, &replay);
    const double new_seconds = std::max(0.0, Seconds(start) - factor_seconds);

    std::string per_pass;
    for (std::size_t p = 0; p < old.pass_seconds.size(); ++p) {
      char text[32];
      std::snprintf(text, sizeof text, "%s%.2f", p == 0 ? "" : " + ", old.pass_seconds[p]);
      per_pass += text;
    }
    const bool gram = static_cast<double>(fit.k) * 0x1p-53 / fit.rcond > stepledger::kInverseFromFactorLimit;
    std::printf("| %s | %.2g | %.3f | %zu | %s | %.2f | %d | %s | %s | %.3f | %.1f |\n",
                collinear ? "collinear" : "well-conditioned", fit.rcond, replay_seconds,
                old.pass_seconds.size(), per_pass.c_str(), old.total, fit.refinement_passes,
                stepledger::ToString(fit.refinement_stop), gram ? "yes" : "no", new_seconds,
                old.total / new_seconds);
    std::fflush(stdout);
    if (checksum == 0.5) std::printf("\n");  // keeps the replay-only pass from being optimised away
  }
  std::printf("\nold: one row at a time in double-double, FMA products through the C library (the\n"
              "default build targets baseline x86-64); new: blocks of 64 rows by column, Dekker products,\n"
              "eight Sum2 lanes, vectorised with SSE2. Both passes over the same in-memory rows.\n");
  return 0;
}

// The holdout and the final model's k-fold error through RunPlan (run/run_plan.h, the
// `validation` of RunResult), against direct computations from the rows this test wrote.
//
// Sources:
//  - The assignments are written out here, apart from engine/resampling.h: a data record i
//    (0-based among all data records, used or not) is held out when
//    SplitMix64(seed + (i + 1) * 0x9E3779B97F4A7C15) / 2^64 < fraction, compared exactly as
//    integers (hash < fraction * 2^64), and its fold is that hash mod k (SplitMix64: Steele, Lea
//    and Flood, OOPSLA 2014; constants from memory, checked against the generator's known
//    outputs in tests/engine/cross_validation_test.cpp).
//  - Every reference fit is weighted least squares on the rows by LAPACK through Armadillo
//    (arma::solve without approximation, return checked), the k-fold refit being
//    testing::BruteForceFoldSse (tests/support/dense_design.h).
//  - The holdout statistics are the textbook definitions (common practice): RMSE =
//    sqrt(sum w e^2 / sum w), mean error = sum w e / sum w with e = observed - predicted,
//    R^2 = 1 - SSE / sum w (y - ybar_w)^2 about the held-out rows' own weighted mean.
//  - The deciles of a holdout of at most 64 rows are empirical quantiles, the smallest
//    prediction with at least d/10 of the rows at or below it (Hyndman and Fan's type 1, from
//    memory), computed here with integer ranks.
//  - Tolerance 1e-9 relative (common practice for a factor-based fit against a direct solve of
//    a well-conditioned problem: both agree to about 1e-12).
// The data are invented: a reseller of refurbished laptops whose true model is
// price = 350 - 6 age + 22 ram + 18 screen + 45 [grade A] - 30 [grade C] + noise (sd 25);
// `battery` has no effect. Some rows miss the age or the price (dropped), and in the weighted
// variant some have 0 units (dropped).

#include <gtest/gtest.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <optional>
#include <string>
#include <tuple>
#include <vector>

#include <armadillo>

#include "stepledger/engine/resampling.h"
#include "stepledger/run/run_plan.h"
#include "support/dense_design.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

using testing::TempDir;
using testing::TestRandom;

// --- The formulas, written out independently ---------------------------------------------------

std::uint64_t Hash(std::uint64_t seed, std::uint64_t record) {
  std::uint64_t z = seed + (record + 1) * 0x9E3779B97F4A7C15ull;  // modulo 2^64
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

// hash / 2^64 < fraction as integers: fraction * 2^64 is an integer for fractions >= 2^-12.
bool HeldOut(double fraction, std::uint64_t seed, std::uint64_t record) {
  int exponent = 0;
  const double mantissa = std::frexp(fraction, &exponent);
  const auto significand = static_cast<std::uint64_t>(std::ldexp(mantissa, 53));
  const int shift = exponent + 11;  // fraction * 2^64 = significand * 2^(exponent - 53 + 64)
  EXPECT_GE(shift, 0);
  return Hash(seed, record) < (significand << shift);
}

// --- Invented data -------------------------------------------------------------------------------

struct Record {
  double price = 0, age = 0, ram = 0, screen = 0, battery = 0, units = 1;
  std::string grade;
  bool price_missing = false, age_missing = false;
};

std::string Shortest(double value) {
  char text[32];
  const auto written = std::to_chars(text, text + sizeof text, value);
  return std::string(text, written.ptr);
}

struct Data {
  std::string text;
  std::vector<Record> records;
};

Data MakeData(std::size_t rows, bool weighted, std::uint64_t seed) {
  TestRandom random(seed);
  const char* grades[] = {"A", "B", "C"};
  Data data;
  data.text = std::string("price,age,ram,screen,grade,battery") + (weighted ? ",units\n" : "\n");
  for (std::size_t i = 0; i < rows; ++i) {
    Record record;
    record.age = std::round(random.Uniform(3, 60));
    record.ram = 4 * std::floor(random.Uniform(1, 9));
    record.screen = std::round(random.Uniform(11.6, 17.3) * 10) / 10;
    record.grade = grades[std::min(2, static_cast<int>(random.Uniform(0, 3)))];
    record.battery = std::round(random.Uniform(40, 100));
    record.price = 350 - 6 * record.age + 22 * record.ram + 18 * record.screen +
                   (record.grade == "A" ? 45 : record.grade == "C" ? -30 : 0) + 25 * random.Normal();
    record.units = weighted ? (random.Uniform(0, 1) < 0.03 ? 0.0 : std::round(random.Uniform(1, 5))) : 1.0;
    record.price_missing = random.Uniform(0, 1) < 0.01;
    record.age_missing = random.Uniform(0, 1) < 0.02;
    data.text += (record.price_missing ? std::string("NA") : Shortest(record.price)) + "," +
                 (record.age_missing ? std::string() : Shortest(record.age)) + "," + Shortest(record.ram) + "," +
                 Shortest(record.screen) + "," + record.grade + "," + Shortest(record.battery);
    if (weighted) data.text += "," + Shortest(record.units);
    data.text += "\n";
    data.records.push_back(record);
  }
  return data;
}

double Part(const Record& record, const std::string& name) {
  if (name == "intercept") return 1;
  if (name == "age") return record.age;
  if (name == "ram") return record.ram;
  if (name == "screen") return record.screen;
  if (name == "battery") return record.battery;
  if (name.rfind("grade=", 0) == 0) return record.grade == name.substr(6) ? 1 : 0;
  ADD_FAILURE() << "unexpected design column " << name;
  return 0;
}

// The rows of one set (model rows or held-out rows) as dense matrices over every design column.
struct Rows {
  arma::mat x;
  arma::vec y, w;
  std::vector<std::uint64_t> records;  // data record index of each row
};

Rows Collect(const Data& data, const Design& design, bool weighted, const std::optional<HoldoutSettings>& holdout,
             bool held_out_set) {
  std::vector<std::uint64_t> chosen;
  for (std::uint64_t i = 0; i < data.records.size(); ++i) {
    const Record& record = data.records[i];
    if (record.price_missing || record.age_missing || (weighted && record.units == 0)) continue;
    const bool out = holdout && HeldOut(holdout->fraction, holdout->seed, i);
    if (out == held_out_set) chosen.push_back(i);
  }
  Rows rows;
  rows.records = chosen;
  rows.x.set_size(chosen.size(), design.column_count());
  rows.y.set_size(chosen.size());
  rows.w.set_size(chosen.size());
  for (std::size_t r = 0; r < chosen.size(); ++r) {
    const Record& record = data.records[chosen[r]];
    for (std::size_t j = 0; j < design.column_count(); ++j) rows.x(r, j) = Part(record, design.columns[j].name);
    rows.y(r) = record.price;
    rows.w(r) = record.units;
  }
  return rows;
}

double Relative(double actual, double expected) {
  return std::fabs(actual - expected) / std::max(std::fabs(expected), 1e-300);
}

// Weighted least squares over the given design columns: coefficients and RSS.
struct DirectFit {
  arma::vec beta;
  double rss = 0;
};

DirectFit Fit(const Rows& rows, const std::vector<std::size_t>& columns) {
  arma::uvec chosen(columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) chosen(j) = columns[j];
  const arma::vec root = arma::sqrt(rows.w);
  const arma::mat x = rows.x.cols(chosen).eval().each_col() % root;
  const arma::vec y = rows.y % root;
  DirectFit fit;
  EXPECT_TRUE(arma::solve(fit.beta, x, y, arma::solve_opts::no_approx));
  fit.rss = arma::accu(arma::square(y - x * fit.beta));
  return fit;
}

// The design columns of the intercept and the named terms, in that order.
std::vector<std::size_t> ColumnsOf(const Design& design, const std::vector<std::string>& terms) {
  std::vector<std::size_t> columns;
  if (design.intercept) columns.push_back(0);
  for (const std::string& name : terms) {
    const std::size_t term = design.FindTerm(name);
    EXPECT_NE(term, kNoTerm) << name;
    if (term == kNoTerm) continue;
    for (std::size_t c = 0; c < design.terms[term].column_count; ++c) columns.push_back(design.terms[term].first_column + c);
  }
  return columns;
}

// --- The runs ------------------------------------------------------------------------------------

struct Variant {
  bool weighted = false;
  bool holdout = false;
  std::string criterion;
};

std::string Name(const ::testing::TestParamInfo<std::tuple<bool, bool, const char*>>& info) {
  return std::string(std::get<0>(info.param) ? "Weighted" : "Unweighted") +
         (std::get<1>(info.param) ? "Holdout" : "NoHoldout") + "_" + std::get<2>(info.param);
}

constexpr std::size_t kFolds = 5;
constexpr std::uint64_t kFoldSeed = 3;
const HoldoutSettings kHoldout{0.25, 17};

std::string PlanText(const Variant& variant, std::size_t folds = kFolds, const HoldoutSettings& holdout = kHoldout) {
  std::string text = R"({"response": "price", "terms": [
      {"name": "age", "column": "age"}, {"name": "ram", "column": "ram"},
      {"name": "screen", "column": "screen"}, {"name": "grade", "categorical": "grade"},
      {"name": "battery", "column": "battery"}], "method": "forward", "criterion": ")" +
                     variant.criterion + R"(", "folds": )" + std::to_string(folds) +
                     R"(, "seed": )" + std::to_string(kFoldSeed);
  if (variant.weighted) text += R"(, "weights": "units")";
  if (variant.holdout) {
    text += R"(, "holdout": {"fraction": )" + Shortest(holdout.fraction) + R"(, "seed": )" +
            std::to_string(holdout.seed) + "}";
  }
  return text + "}";
}

class HoldoutRun : public ::testing::TestWithParam<std::tuple<bool, bool, const char*>> {
 protected:
  Variant variant() const {
    return Variant{std::get<0>(GetParam()), std::get<1>(GetParam()), std::get<2>(GetParam())};
  }
};

TEST_P(HoldoutRun, HeldOutRowsAreAbsentFromEverySelectionStatistic) {
  const Variant v = variant();
  TempDir folder;
  const Data data = MakeData(3000, v.weighted, 101);
  const auto path = folder.Write("laptops.csv", data.text);
  const RunResult run = RunPlan(path, ParsePlanText(PlanText(v)), RunOptions{});
  const std::optional<HoldoutSettings> holdout = v.holdout ? std::optional(kHoldout) : std::nullopt;
  const Rows model = Collect(data, run.design, v.weighted, holdout, false);
  const Rows held = Collect(data, run.design, v.weighted, holdout, true);

  EXPECT_EQ(run.accounting.rows_read, data.records.size());
  EXPECT_EQ(run.accounting.rows_used, model.records.size());
  EXPECT_EQ(run.accounting.rows_held_out, held.records.size());
  EXPECT_EQ(run.accounting.rows_used + run.accounting.rows_held_out + run.accounting.RowsDroppedTotal(),
            run.accounting.rows_read);
  if (v.holdout) {
    EXPECT_GT(held.records.size(), 600u);
    EXPECT_LT(held.records.size(), 900u);
  }
  const double weight = arma::accu(model.w);
  EXPECT_EQ(run.fit.n, model.records.size());
  EXPECT_EQ(run.search.n, static_cast<double>(model.records.size()));
  EXPECT_LE(Relative(run.fit.weight_sum, weight), 1e-12);
  const double mean = arma::accu(model.w % model.y) / weight;
  const double tss = arma::accu(model.w % arma::square(model.y - mean));
  EXPECT_LE(Relative(run.search.tss, tss), 1e-9);
  EXPECT_LE(Relative(run.fit.tss, tss), 1e-9);

  // Every RSS the route recorded: the model after each step, and each candidate scored from the
  // model before it; with criterion cv, each candidate's fold errors too.
  ASSERT_GE(run.search.steps.size(), 2u);
  std::size_t checked = 0;
  for (std::size_t s = 0; s < run.search.steps.size(); ++s) {
    const RouteStep& step = run.search.steps[s];
    if (step.rss) {
      EXPECT_LE(Relative(*step.rss, Fit(model, ColumnsOf(run.design, step.model_terms)).rss), 1e-9) << "step " << s;
      ++checked;
    }
    if (s == 0) continue;
    for (const CandidateScore& candidate : step.candidates) {
      if (!candidate.rss) continue;
      ASSERT_EQ(candidate.action, MoveAction::kAdd);
      std::vector<std::string> terms = run.search.steps[s - 1].model_terms;
      terms.push_back(candidate.term);
      const std::vector<std::size_t> columns = ColumnsOf(run.design, terms);
      EXPECT_LE(Relative(*candidate.rss, Fit(model, columns).rss), 1e-9) << "step " << s << " + " << candidate.term;
      ++checked;
      if (v.criterion == "cv" && !candidate.fold_sse.empty()) {
        std::vector<std::size_t> fold_of_row(model.records.size());
        for (std::size_t r = 0; r < fold_of_row.size(); ++r) fold_of_row[r] = Hash(kFoldSeed, model.records[r]) % kFolds;
        const auto sse = testing::BruteForceFoldSse(model.x, model.y, model.w, fold_of_row, kFolds, columns);
        ASSERT_TRUE(sse.has_value());
        ASSERT_EQ(candidate.fold_sse.size(), kFolds);
        for (std::size_t f = 0; f < kFolds; ++f) {
          EXPECT_LE(Relative(candidate.fold_sse[f], (*sse)[f]), 1e-9) << "step " << s << " + " << candidate.term;
        }
      }
    }
  }
  EXPECT_GE(checked, 10u);

  // The final coefficients: weighted least squares on the model's rows.
  // The true model's terms are found (a property of this data, not of the holdout); BIC stops
  // there, cv may take the noise term too.
  std::vector<std::string> terms = run.fit.terms;
  std::sort(terms.begin(), terms.end());
  std::vector<std::string> truth = {"age", "grade", "ram", "screen"};
  if (v.criterion == "cv" && terms.size() == 5) truth.insert(truth.begin() + 1, "battery");
  EXPECT_EQ(terms, truth);
  const DirectFit direct = Fit(model, run.fit.columns);
  ASSERT_EQ(run.fit.beta.n_elem, direct.beta.n_elem);
  for (arma::uword j = 0; j < direct.beta.n_elem; ++j) {
    EXPECT_LE(Relative(run.fit.beta(j), direct.beta(j)), 1e-9) << run.design.columns[run.fit.columns[j]].name;
  }
  EXPECT_LE(Relative(run.fit.rss, direct.rss), 1e-9);
  EXPECT_EQ(run.validation.holdout.has_value(), v.holdout);
}

// Weighted or not, by criterion: always with a holdout.
class HoldoutJudged : public ::testing::TestWithParam<std::tuple<bool, const char*>> {};

TEST_P(HoldoutJudged, OnItsOwnRowsWithTheFinalCoefficients) {
  const Variant v{std::get<0>(GetParam()), true, std::get<1>(GetParam())};
  TempDir folder;
  const Data data = MakeData(3000, v.weighted, 202);
  const auto path = folder.Write("laptops.csv", data.text);
  const RunResult run = RunPlan(path, ParsePlanText(PlanText(v)), RunOptions{});
  ASSERT_TRUE(run.validation.holdout.has_value());
  const HoldoutValidation& result = *run.validation.holdout;
  EXPECT_EQ(result.settings, kHoldout);
  const Rows held = Collect(data, run.design, v.weighted, kHoldout, true);
  ASSERT_GT(held.records.size(), 64u) << "the sketch path";

  arma::uvec columns(run.fit.columns.size());
  for (std::size_t j = 0; j < columns.n_elem; ++j) columns(j) = run.fit.columns[j];
  const arma::vec prediction = held.x.cols(columns) * run.fit.beta;
  const arma::vec error = held.y - prediction;
  const double weight = arma::accu(held.w);
  const double sse = arma::accu(held.w % arma::square(error));
  const double mean = arma::accu(held.w % held.y) / weight;
  const double about_mean = arma::accu(held.w % arma::square(held.y - mean));
  EXPECT_EQ(result.rows, held.records.size());
  EXPECT_LE(Relative(result.weight, weight), 1e-12);
  ASSERT_TRUE(result.rmse && result.mean_error && result.r2);
  EXPECT_LE(Relative(*result.rmse, std::sqrt(sse / weight)), 1e-9);
  EXPECT_LE(Relative(*result.mean_error, arma::accu(held.w % error) / weight), 1e-9);
  EXPECT_LE(Relative(*result.r2, 1 - sse / about_mean), 1e-9);
  // The true noise has sd 25: an honest holdout error is near it (common practice: within 15%).
  EXPECT_NEAR(*result.rmse, 25.0, 25.0 * 0.15);

  // The calibration bins partition the held-out rows and follow the predictions upwards.
  ASSERT_FALSE(result.calibration.empty());
  std::uint64_t rows = 0;
  for (std::size_t b = 0; b < result.calibration.size(); ++b) {
    const CalibrationBin& bin = result.calibration[b];
    rows += bin.rows;
    EXPECT_GE(bin.decile, 1u);
    EXPECT_LE(bin.decile, 10u);
    EXPECT_GT(bin.rows, 0u);
    if (b > 0) {
      EXPECT_GT(bin.decile, result.calibration[b - 1].decile);
      EXPECT_GT(bin.mean_prediction, result.calibration[b - 1].mean_prediction) << "bin " << b;
    }
  }
  EXPECT_EQ(rows, result.rows);
  EXPECT_EQ(result.calibration.size(), 10u) << "hundreds of distinct predictions fill every decile";
  // A bin's mean prediction is a weighted mean of predictions: within their range.
  for (const CalibrationBin& bin : result.calibration) {
    EXPECT_GE(bin.mean_prediction, prediction.min());
    EXPECT_LE(bin.mean_prediction, prediction.max());
  }
}

TEST_P(HoldoutRun, TheFinalModelsFoldErrorIsABruteForceRefit) {
  const Variant v = variant();
  TempDir folder;
  const Data data = MakeData(2000, v.weighted, 303);
  const auto path = folder.Write("laptops.csv", data.text);
  const RunResult run = RunPlan(path, ParsePlanText(PlanText(v)), RunOptions{});
  const std::optional<HoldoutSettings> holdout = v.holdout ? std::optional(kHoldout) : std::nullopt;
  const Rows model = Collect(data, run.design, v.weighted, holdout, false);
  const FoldValidation& folds = run.validation.folds;
  EXPECT_EQ(folds.settings, (FoldSettings{kFolds, kFoldSeed}));
  std::vector<std::size_t> fold_of_row(model.records.size());
  for (std::size_t r = 0; r < fold_of_row.size(); ++r) fold_of_row[r] = Hash(kFoldSeed, model.records[r]) % kFolds;
  const auto sse = testing::BruteForceFoldSse(model.x, model.y, model.w, fold_of_row, kFolds, run.fit.columns);
  ASSERT_TRUE(sse.has_value());
  ASSERT_TRUE(folds.rmse.has_value()) << folds.undefined_reason;
  ASSERT_EQ(folds.per_fold.size(), kFolds);
  double total = 0;
  for (std::size_t f = 0; f < kFolds; ++f) {
    std::uint64_t rows = 0;
    double weight = 0;
    for (std::size_t r = 0; r < fold_of_row.size(); ++r) {
      if (fold_of_row[r] != f) continue;
      ++rows;
      weight += model.w(r);
    }
    EXPECT_EQ(folds.per_fold[f].fold, f);
    EXPECT_EQ(folds.per_fold[f].rows, rows) << "fold " << f;
    EXPECT_LE(Relative(folds.per_fold[f].weight, weight), 1e-12) << "fold " << f;
    EXPECT_LE(Relative(folds.per_fold[f].sse, (*sse)[f]), 1e-9) << "fold " << f;
    total += (*sse)[f];
  }
  EXPECT_LE(Relative(*folds.rmse, std::sqrt(total / arma::accu(model.w))), 1e-9);
  ASSERT_TRUE(folds.residual_sd.has_value());
  EXPECT_LE(Relative(*folds.residual_sd, std::sqrt(Fit(model, run.fit.columns).rss / (static_cast<double>(model.records.size()) -
                                                                                      static_cast<double>(run.fit.columns.size())))),
            1e-9);
}

INSTANTIATE_TEST_SUITE_P(Variants, HoldoutRun,
                         ::testing::Combine(::testing::Bool(), ::testing::Bool(), ::testing::Values("bic", "cv")),
                         Name);

INSTANTIATE_TEST_SUITE_P(Variants, HoldoutJudged, ::testing::Combine(::testing::Bool(), ::testing::Values("bic", "cv")),
                         [](const ::testing::TestParamInfo<std::tuple<bool, const char*>>& info) {
                           return std::string(std::get<0>(info.param) ? "Weighted" : "Unweighted") + "_" +
                                  std::get<1>(info.param);
                         });

// A small holdout (at most 64 rows): the deciles are exact empirical quantiles, so every bin's
// rows and means are known.
TEST(HoldoutRun, ASmallHoldoutHasExactDeciles) {
  for (const bool weighted : {false, true}) {
    TempDir folder;
    const Data data = MakeData(220, weighted, 404);
    const auto path = folder.Write("laptops.csv", data.text);
    const HoldoutSettings small{0.2, 5};
    const Variant v{weighted, true, "bic"};
    const RunResult run = RunPlan(path, ParsePlanText(PlanText(v, 4, small)), RunOptions{});
    ASSERT_TRUE(run.validation.holdout.has_value());
    const HoldoutValidation& result = *run.validation.holdout;
    const Rows held = Collect(data, run.design, weighted, small, true);
    const std::size_t n = held.records.size();
    ASSERT_GE(n, 20u);
    ASSERT_LE(n, 64u) << "the exact path";
    arma::uvec columns(run.fit.columns.size());
    for (std::size_t j = 0; j < columns.n_elem; ++j) columns(j) = run.fit.columns[j];
    const arma::vec prediction = held.x.cols(columns) * run.fit.beta;
    const arma::vec sorted = arma::sort(prediction);
    std::vector<double> bounds;
    for (std::size_t d = 1; d <= 9; ++d) {
      const std::size_t rank = std::max<std::size_t>(1, (d * n + 9) / 10);  // ceil(d n / 10)
      bounds.push_back(sorted(rank - 1));
    }
    std::vector<std::uint64_t> rows(10, 0);
    std::vector<double> weight(10, 0), predicted(10, 0), observed(10, 0);
    for (std::size_t r = 0; r < n; ++r) {
      const auto bin = static_cast<std::size_t>(std::lower_bound(bounds.begin(), bounds.end(), prediction(r)) -
                                                bounds.begin());
      ++rows[bin];
      weight[bin] += held.w(r);
      predicted[bin] += held.w(r) * prediction(r);
      observed[bin] += held.w(r) * held.y(r);
    }
    std::size_t b = 0;
    for (std::size_t bin = 0; bin < 10; ++bin) {
      if (rows[bin] == 0) continue;
      ASSERT_LT(b, result.calibration.size());
      const CalibrationBin& got = result.calibration[b++];
      EXPECT_EQ(got.decile, bin + 1);
      EXPECT_EQ(got.rows, rows[bin]) << "decile " << bin + 1;
      EXPECT_LE(Relative(got.mean_prediction, predicted[bin] / weight[bin]), 1e-9) << "decile " << bin + 1;
      EXPECT_LE(Relative(got.mean_observed, observed[bin] / weight[bin]), 1e-9) << "decile " << bin + 1;
    }
    EXPECT_EQ(b, result.calibration.size());
  }
}

}  // namespace
}  // namespace stepledger

// Pricing new rows (engine/prediction.h): the arithmetic against the textbook formulas of
// simple regression (common practice) and a published t table value; the fitted rows priced
// again reproduce ComputeDiagnostics (fitted values, leverages); every flag on a row built
// for it and absent on ordinary rows; the evaluator's header and cell errors.
// Data: invented, from a fixed seed; the true model is known to the test.

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "stepledger/engine/column_source.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/engine/profile.h"
#include "support/row_diagnostics.h"
#include "support/test_paths.h"
#include "support/test_random.h"
#include "support/term_specs.h"

namespace stepledger {
namespace {

double Relative(double a, double b) { return std::abs(a - b) / std::max(std::abs(b), 1e-300); }

std::string Number(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

using testing::Categorical;
using testing::Log;
using testing::Numeric;
using testing::Power;
using testing::Product;

// A model fitted through the real pipeline (profile, design, factor pass, refined fit,
// diagnostics) plus what pricing needs, computed here from the fitted rows.
struct Fitted {
  std::filesystem::path data;
  DataProfile profile;
  Design design;
  FitResult fit;
  std::vector<RowDiagnostic> diagnostics;  ///< every row, file order
  PricingModel model;
};

Fitted FitAll(const std::filesystem::path& data, const DesignSpec& spec) {
  Fitted fitted;
  fitted.data = data;
  const CsvOptions csv;
  fitted.profile = ProfileCsv(data, csv);
  fitted.design = BuildDesign(spec, fitted.profile);
  const PassResult pass = RunFactorPass(data, fitted.design, PassOptions{});
  std::vector<std::size_t> terms(fitted.design.terms.size());
  std::iota(terms.begin(), terms.end(), std::size_t{0});
  const RowReplay replay = FileRowReplay(data, fitted.design, csv);
  fitted.fit = FitModel(pass.factor, fitted.design, terms, FitOptions{}, &replay);
  fitted.diagnostics = testing::DiagnoseEveryRow(fitted.fit, fitted.design, replay);

  PricingModel& model = fitted.model;
  model.design = fitted.design;
  model.fit = fitted.fit;
  for (std::size_t column : fitted.fit.columns) model.column_names.push_back(fitted.design.columns[column].name);
  // Ranges of the numeric, log and power terms' design values and the largest unit leverage,
  // recomputed here from the rows (what the audit records).
  std::vector<double> low(fitted.design.terms.size(), std::numeric_limits<double>::infinity()), high(fitted.design.terms.size(), -std::numeric_limits<double>::infinity());
  std::vector<double> weights;
  ForEachUsedRow(data, fitted.design, csv, [&](const UsedRow& row) {
    for (std::size_t t = 0; t < fitted.design.terms.size(); ++t) {
      const double value = row.x[fitted.design.terms[t].first_column];
      low[t] = std::min(low[t], value);
      high[t] = std::max(high[t], value);
    }
    weights.push_back(row.weight);
  });
  for (std::size_t t = 0; t < fitted.design.terms.size(); ++t) {
    const TermKind kind = fitted.design.terms[t].kind;
    if (kind == TermKind::kNumeric || kind == TermKind::kLog || kind == TermKind::kPower) {
      model.ranges.push_back({fitted.design.terms[t].name, low[t], high[t]});
    }
  }
  double max_unit = 0;
  double smearing = 0;
  for (std::size_t i = 0; i < weights.size(); ++i) {
    const RowDiagnostic& row = fitted.diagnostics[i];
    max_unit = std::max(max_unit, row.leverage / weights[i]);
    smearing += std::exp(std::sqrt(weights[i]) * row.residual);
  }
  model.max_unit_leverage = max_unit;
  if (spec.response_transform == ResponseTransform::kLog) model.smearing_factor = smearing / weights.size();
  return fitted;
}

std::vector<PredictedRow> PriceFile(const Predictor& predictor, const std::filesystem::path& rows,
                                    const std::vector<std::string>& missing = {"", "NA"}) {
  CsvOptions csv;
  csv.missing_tokens = missing;
  CsvReader reader(rows, csv);
  PredictionRowEvaluator evaluator(predictor.design(), reader);
  std::vector<PredictedRow> priced;
  CsvRecord record;
  while (reader.Next(record)) priced.push_back(predictor.Predict(evaluator.Evaluate(record)));
  return priced;
}

// ---- simple regression: textbook formulas ----------------------------------------------------

TEST(Prediction, SimpleRegressionMatchesTheTextbookFormulas) {
  // Common practice (any regression text): for y = a + b x with n rows,
  //   se_mean = s sqrt(1/n + (x0 - xbar)^2 / Sxx),  se_obs = s sqrt(1 + 1/n + (x0 - xbar)^2 / Sxx).
  testing::TempDir scratch;
  testing::TestRandom random(5);
  std::ostringstream csv;
  csv << "x,y\n";
  std::vector<double> xs, ys;
  for (int i = 0; i < 20; ++i) {
    const double x = random.Uniform(0, 10);
    const double y = 3 + 0.5 * x + random.Normal();
    xs.push_back(x);
    ys.push_back(y);
    csv << Number(x) << "," << Number(y) << "\n";
  }
  const auto data = scratch.Write("data.csv", csv.str());
  DesignSpec spec;
  spec.response = "y";
  spec.terms = {Numeric("x", "x")};
  const Fitted fitted = FitAll(data, spec);

  const double n = 20;
  const double xbar = std::accumulate(xs.begin(), xs.end(), 0.0) / n;
  double sxx = 0;
  for (double x : xs) sxx += (x - xbar) * (x - xbar);
  const double s = *fitted.fit.criteria.sigma;

  PredictionOptions options;
  options.level = 0.95;
  const Predictor predictor(fitted.model, options);
  // Published t table (any statistics handbook): t(0.975; 18) = 2.1009 (4 decimals).
  ASSERT_TRUE(predictor.t_quantile());
  EXPECT_NEAR(*predictor.t_quantile(), 2.1009, 5e-5);

  const auto rows = scratch.Write("rows.csv", "x\n0\n5\n7.25\n10\n");
  const std::vector<PredictedRow> priced = PriceFile(predictor, rows);
  ASSERT_EQ(priced.size(), 4u);
  const double x0s[] = {0, 5, 7.25, 10};
  for (std::size_t i = 0; i < 4; ++i) {
    const double x0 = x0s[i];
    const PredictedRow& row = priced[i];
    ASSERT_TRUE(row.priced());
    const double expected_prediction = fitted.fit.beta(0) + fitted.fit.beta(1) * x0;
    EXPECT_LT(Relative(*row.prediction, expected_prediction), 1e-13);
    const double h0 = 1 / n + (x0 - xbar) * (x0 - xbar) / sxx;
    EXPECT_LT(Relative(*row.leverage, h0), 1e-12) << x0;
    EXPECT_LT(Relative(*row.se_mean, s * std::sqrt(h0)), 1e-12) << x0;
    const double t = *predictor.t_quantile();
    EXPECT_LT(Relative(row.ci->high - *row.prediction, t * s * std::sqrt(h0)), 1e-12);
    EXPECT_LT(Relative(*row.prediction - row.ci->low, t * s * std::sqrt(h0)), 1e-12);
    EXPECT_LT(Relative(row.pi->high - *row.prediction, t * s * std::sqrt(1 + h0)), 1e-12);
    EXPECT_FALSE(row.back) << "no back-transform without a logged response";
    EXPECT_EQ(row.line, i + 2);
    EXPECT_EQ(row.row_index, i);
  }
  // 0 and 10 lie outside the fitted x range (uniform on (0, 10) leaves some room at the ends).
  EXPECT_TRUE(priced[0].Has(PredictionFlag::kOutsideRange));
  EXPECT_TRUE(priced[3].Has(PredictionFlag::kOutsideRange));
  EXPECT_TRUE(priced[1].flags.empty()) << priced[1].Detail();
  EXPECT_TRUE(priced[2].flags.empty()) << priced[2].Detail();
  EXPECT_NE(priced[0].Detail().find("outside-range: x = 0 outside ["), std::string::npos)
      << priced[0].Detail();
  // A higher level gives a wider interval (common practice).
  options.level = 0.99;
  const Predictor wider(fitted.model, options);
  const std::vector<PredictedRow> wide = PriceFile(wider, rows);
  EXPECT_GT(wide[1].ci->high - wide[1].ci->low, priced[1].ci->high - priced[1].ci->low);
}

// ---- a rich weighted model: the fitted rows again ---------------------------------------------

// y = 2 + 0.8 a - 0.3 b + 1.5 ln d + 0.05 a^2 + [g=q] 1 - [g=r] 0.5 + 0.2 a [g=q] + e / sqrt(w);
// b is a + small noise (strongly correlated with a).
std::string RichCsv(std::uint64_t seed, int rows) {
  testing::TestRandom random(seed);
  std::ostringstream csv;
  csv << "id,a,b,d,g,w,y\n";
  for (int i = 0; i < rows; ++i) {
    const double a = random.Uniform(0, 10);
    const double b = a + 0.2 * random.Normal();
    const double d = random.Uniform(1, 50);
    const int level = static_cast<int>(random.Uniform(0, 3));
    const char g = "pqr"[level];
    const double w = random.Uniform(0.5, 2);
    const double y = 2 + 0.8 * a - 0.3 * b + 1.5 * std::log(d) + 0.05 * a * a + (g == 'q' ? 1 + 0.2 * a : 0) -
                     (g == 'r' ? 0.5 : 0) + 0.4 * random.Normal() / std::sqrt(w);
    csv << "L" << i << "," << Number(a) << "," << Number(b) << "," << Number(d) << "," << g << ","
        << Number(w) << "," << Number(y) << "\n";
  }
  return csv.str();
}

DesignSpec RichSpec() {
  DesignSpec spec;
  spec.response = "y";
  spec.weights = "w";
  spec.terms = {Numeric("a", "a"), Numeric("b", "b"), Log("ld", "d"), Power("a2", "a", 2),
                Categorical("g", "g", "p"), Product("a:g", "a", "g")};
  return spec;
}

TEST(Prediction, FittedRowsReproduceTheDiagnostics) {
  testing::TempDir scratch;
  const auto data = scratch.Write("data.csv", RichCsv(17, 150));
  const Fitted fitted = FitAll(data, RichSpec());
  const Predictor predictor(fitted.model);
  const std::vector<PredictedRow> priced = PriceFile(predictor, data);
  ASSERT_EQ(priced.size(), fitted.diagnostics.size());
  for (std::size_t i = 0; i < priced.size(); ++i) {
    const PredictedRow& row = priced[i];
    const RowDiagnostic& diagnostic = fitted.diagnostics[i];
    ASSERT_TRUE(row.priced()) << row.Detail();
    EXPECT_EQ(row.line, diagnostic.line);
    // Same code path (LinearPredictor, UnitLeverage): equal to the last bit.
    EXPECT_EQ(*row.prediction, diagnostic.fitted) << "line " << row.line;
    EXPECT_LT(Relative(*row.leverage * row.weight, diagnostic.leverage), 1e-15) << "line " << row.line;
    // Every fitted row lies within the fitted ranges and at or below the largest leverage.
    EXPECT_TRUE(row.flags.empty()) << "line " << row.line << ": " << row.Detail();
  }
}

// ---- flags --------------------------------------------------------------------------------------

class PredictionFlags : public ::testing::Test {
 protected:
  void SetUp() override {
    data_ = scratch_.Write("data.csv", RichCsv(23, 200));
    fitted_ = FitAll(data_, RichSpec());
  }
  std::vector<PredictedRow> Price(const std::string& rows_csv) {
    const Predictor predictor(fitted_.model);
    return PriceFile(predictor, scratch_.Write("rows.csv", rows_csv));
  }
  testing::TempDir scratch_;
  std::filesystem::path data_;
  Fitted fitted_;
};

TEST_F(PredictionFlags, EachFlagOnTheRowBuiltForIt) {
  // Rows (columns in another order than the data, no response, no id: only what the model needs
  // plus the weights):
  //  1 ordinary                          2 a outside (numeric, also a^2)
  //  3 d outside (log term)              4 a and b opposite ends (hidden extrapolation)
  //  5 unknown level                     6 missing b
  //  7 text in d                         8 d = 0 under a log
  //  9 weight 0                          10 ordinary, weight 4
  const std::vector<PredictedRow> rows = Price(
      "g,d,b,a,w\n"
      "q,10,5,5,1\n"
      "p,10,5,25,1\n"
      "r,400,5,5,1\n"
      "p,10,9.5,0.5,1\n"
      "z,10,5,5,1\n"
      "q,10,NA,5,1\n"
      "q,ten,5,5,1\n"
      "q,0,5,5,1\n"
      "q,10,5,5,0\n"
      "q,10,5,5,4\n");
  ASSERT_EQ(rows.size(), 10u);
  using F = PredictionFlag;
  auto only = [&](std::size_t index, std::vector<F> expected) {
    EXPECT_EQ(rows[index].flags, expected) << "row " << index + 1 << ": " << rows[index].Detail();
  };
  only(0, {});
  only(1, {F::kOutsideRange});
  only(2, {F::kOutsideRange});
  only(3, {F::kHiddenExtrapolation});
  only(4, {F::kUnknownLevel});
  only(5, {F::kMissing});
  only(6, {F::kInvalidValue});
  only(7, {F::kInvalidValue});
  only(8, {F::kInvalidValue});
  only(9, {});

  // Priced rows have numbers; refused ones none.
  for (std::size_t i : {0, 1, 2, 3, 9}) EXPECT_TRUE(rows[i].priced()) << i;
  for (std::size_t i : {4, 5, 6, 7, 8}) EXPECT_FALSE(rows[i].priced()) << i;

  // a = 25 is outside both through a and a^2; the column is listed once, on its own scale.
  ASSERT_EQ(rows[1].outside_range.size(), 1u);
  EXPECT_EQ(rows[1].outside_range[0].column, "a");
  EXPECT_EQ(rows[1].outside_range[0].value, 25);
  EXPECT_NE(rows[1].Detail().find("outside-range: a = 25 outside [0."), std::string::npos) << rows[1].Detail();
  // d = 400 under a log: the value and exp of the recorded log bounds (about 1 to 50).
  ASSERT_EQ(rows[2].outside_range.size(), 1u);
  const OutsideRange& d = rows[2].outside_range[0];
  EXPECT_EQ(d.column, "d");
  EXPECT_EQ(d.kind, TermKind::kLog);
  EXPECT_EQ(d.value, 400);
  EXPECT_GT(d.min, 1);
  EXPECT_LT(d.min, 2);
  EXPECT_GT(d.max, 45);
  EXPECT_LE(d.max, 50);
  EXPECT_NE(rows[2].Detail().find("(log term 'ld')"), std::string::npos) << rows[2].Detail();
  // Hidden extrapolation: each column inside its range, leverage above the largest fitted one.
  EXPECT_TRUE(rows[3].outside_range.empty());
  EXPECT_GT(*rows[3].leverage, *fitted_.model.max_unit_leverage);
  EXPECT_NE(rows[3].Detail().find("hidden-extrapolation: leverage"), std::string::npos);
  // Problems name the column, the level or text, and the term needing it.
  EXPECT_NE(rows[4].Detail().find("unknown-level: g: level 'z' was not in the fitted data (term 'g')"),
            std::string::npos)
      << rows[4].Detail();
  EXPECT_NE(rows[5].Detail().find("missing: b is missing (term 'b')"), std::string::npos) << rows[5].Detail();
  EXPECT_NE(rows[6].Detail().find("invalid-value: d: 'ten' is not a number (term 'ld')"), std::string::npos)
      << rows[6].Detail();
  EXPECT_NE(rows[7].Detail().find("invalid-value: d: '0' is not positive"), std::string::npos) << rows[7].Detail();
  EXPECT_NE(rows[8].Detail().find("invalid-value: w: '0' is not a positive weight"), std::string::npos)
      << rows[8].Detail();
  EXPECT_EQ(rows[5].problems.at(0).where, (scratch_.path() / "rows.csv").string() + ":7:6");

  // The weight enters the prediction interval only: 1/w0 + h0.
  EXPECT_EQ(*rows[9].prediction, *rows[0].prediction);
  EXPECT_EQ(*rows[9].se_mean, *rows[0].se_mean);
  const double sigma = *fitted_.fit.criteria.sigma;
  const double h0 = *rows[0].leverage;
  EXPECT_LT(Relative((rows[9].pi->high - rows[9].pi->low) / (rows[0].pi->high - rows[0].pi->low),
                     std::sqrt((0.25 + h0) / (1 + h0))),
            1e-12);
  EXPECT_LT(Relative(rows[0].ci->high - rows[0].ci->low, 2 * *Predictor(fitted_.model).t_quantile() * sigma * std::sqrt(h0)),
            1e-12);
}

// Columns in memory (engine/row_cells.h, ColumnRows) are priced by the same evaluator as the rows
// of a file: the rows of EachFlagOnTheRowBuiltForIt (but "ten", which a number column cannot hold:
// +infinity instead, "not a finite number" in both) give the same flags, problems and bits; places
// are named "memory:ROW:COLUMN"; a column the model does not need is never read.
class VectorColumns : public ColumnSource {
 public:
  std::vector<MemoryColumn> names;
  std::vector<std::vector<double>> numbers;           // per column (empty for text columns)
  std::vector<std::vector<const char*>> texts;        // per column (nullptr: missing)
  std::vector<int> reads;
  const std::vector<MemoryColumn>& columns() const override { return names; }
  std::uint64_t rows() const override { return numbers[0].empty() ? texts[0].size() : numbers[0].size(); }
  void ReadNumbers(std::size_t column, std::uint64_t first, std::size_t count, double* out) override {
    ++reads[column];
    for (std::size_t i = 0; i < count; ++i) out[i] = numbers[column][first + i];
  }
  void ReadTexts(std::size_t column, std::uint64_t first, std::size_t count, std::vector<std::string>& out,
                 std::vector<char>& missing) override {
    ++reads[column];
    for (std::size_t i = 0; i < count; ++i) {
      const char* text = texts[column][first + i];
      missing[i] = text == nullptr ? 1 : 0;
      if (text != nullptr) out[i] = text;
    }
  }
};

TEST_F(PredictionFlags, ColumnsInMemoryArePricedAsTheSameRowsOfAFile) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  const std::vector<PredictedRow> from_file = Price(
      "g,d,b,a,w,unused\n"
      "q,10,5,5,1,x\n"
      "p,10,5,25,1,x\n"
      "r,400,5,5,1,x\n"
      "p,10,9.5,0.5,1,x\n"
      "z,10,5,5,1,x\n"
      "q,10,NA,5,1,x\n"
      "q,inf,5,5,1,x\n"
      "q,0,5,5,1,x\n"
      "q,10,5,5,0,x\n"
      "q,10,5,5,4,x\n");
  VectorColumns columns;
  columns.names = {{"g", MemoryColumnKind::kText}, {"d", MemoryColumnKind::kNumber}, {"b", MemoryColumnKind::kNumber},
                   {"a", MemoryColumnKind::kNumber}, {"w", MemoryColumnKind::kNumber},
                   {"unused", MemoryColumnKind::kText}};
  columns.numbers = {{},
                     {10, 10, 400, 10, 10, 10, inf, 0, 10, 10},
                     {5, 5, 5, 9.5, 5, nan, 5, 5, 5, 5},
                     {5, 25, 5, 0.5, 5, 5, 5, 5, 5, 5},
                     {1, 1, 1, 1, 1, 1, 1, 1, 0, 4},
                     {}};
  columns.texts = {{"q", "p", "r", "p", "z", "q", "q", "q", "q", "q"}, {}, {}, {}, {}, std::vector<const char*>(10, "x")};
  columns.reads.assign(6, 0);
  const Predictor predictor(fitted_.model);
  ColumnRows rows(columns);
  const PredictionRowEvaluator evaluator(predictor.design(), rows);
  std::vector<PredictedRow> from_memory;
  while (rows.Next()) from_memory.push_back(predictor.Predict(evaluator.Evaluate(rows)));
  ASSERT_EQ(from_memory.size(), from_file.size());
  for (std::size_t i = 0; i < from_file.size(); ++i) {
    const PredictedRow& file = from_file[i];
    const PredictedRow& memory = from_memory[i];
    EXPECT_EQ(memory.row_index, file.row_index);
    EXPECT_EQ(memory.line, file.line - 1) << "memory rows count from 1, file lines after the header";
    EXPECT_EQ(memory.flags, file.flags) << i;
    EXPECT_EQ(memory.Detail(), file.Detail()) << i;
    EXPECT_EQ(memory.weight, file.weight) << i;
    ASSERT_EQ(memory.priced(), file.priced()) << i;
    if (file.priced()) {
      EXPECT_EQ(*memory.prediction, *file.prediction) << i;
      EXPECT_EQ(*memory.leverage, *file.leverage) << i;
      EXPECT_EQ(memory.pi->low, file.pi->low) << i;
    }
    ASSERT_EQ(memory.problems.size(), file.problems.size()) << i;
    for (std::size_t p = 0; p < file.problems.size(); ++p) {
      EXPECT_EQ(memory.problems[p].text, file.problems[p].text);
      EXPECT_EQ(memory.problems[p].reason, file.problems[p].reason);
    }
  }
  EXPECT_EQ(from_memory[5].problems.at(0).where, "memory:6:3");
  EXPECT_EQ(from_memory[6].problems.at(0).text, "inf");
  EXPECT_EQ(from_memory[6].problems.at(0).reason, "is not a finite number");
  // One chunk: every needed column read once, the unused one never.
  EXPECT_EQ(columns.reads, (std::vector<int>{1, 1, 1, 1, 1, 0}));
  // A missing column is named as a file's is.
  columns.names[2].name = "bb";
  ColumnRows without_b(columns);
  try {
    const PredictionRowEvaluator refused(predictor.design(), without_b);
    FAIL() << "no error";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("memory: no column 'b' in the header; term 'b'"), std::string::npos)
        << error.what();
  }
}

// Finite values so far out that a number of the row overflows: not priced (an invalid-value
// problem at each column outside its range), never "priced" without numbers. a = 1e200 makes
// a^2 infinite; b = 1e160 keeps x'b finite but the leverage, a sum of squares, overflows.
TEST_F(PredictionFlags, ValuesTooFarOutToPriceAreNotPriced) {
  const std::vector<PredictedRow> rows = Price(
      "g,d,b,a,w\n"
      "q,10,5,1e200,1\n"
      "q,10,1e160,5,1\n"
      "q,10,5,5,1\n");
  ASSERT_EQ(rows.size(), 3u);
  for (std::size_t i : {0, 1}) {
    const PredictedRow& row = rows[i];
    EXPECT_FALSE(row.priced()) << i << ": " << row.Detail();
    EXPECT_EQ(row.flags, std::vector<PredictionFlag>{PredictionFlag::kInvalidValue}) << row.Detail();
    EXPECT_FALSE(row.leverage || row.se_mean || row.ci || row.pi || row.back) << row.Detail();
    EXPECT_TRUE(row.outside_range.empty());
    ASSERT_EQ(row.problems.size(), 1u) << row.Detail();
  }
  EXPECT_EQ(rows[0].problems[0].column, "a");
  EXPECT_EQ(rows[0].problems[0].text, "1e+200");
  EXPECT_EQ(rows[0].problems[0].where, (scratch_.path() / "rows.csv").string() + ":2:8");
  EXPECT_NE(rows[0].Detail().find("invalid-value: a: '1e+200' is too far outside the fitted data to price"),
            std::string::npos)
      << rows[0].Detail();
  EXPECT_EQ(rows[1].problems[0].column, "b");
  EXPECT_EQ(rows[1].problems[0].where, (scratch_.path() / "rows.csv").string() + ":3:6");
  EXPECT_TRUE(rows[2].priced());
}

TEST_F(PredictionFlags, SeveralProblemsInOneRowAreAllListed) {
  const std::vector<PredictedRow> rows = Price("a,b,d,g\nNA,x,-1,zz\n");
  ASSERT_EQ(rows.size(), 1u);
  EXPECT_EQ(rows[0].flags, (std::vector<PredictionFlag>{PredictionFlag::kMissing, PredictionFlag::kUnknownLevel,
                                                        PredictionFlag::kInvalidValue}));
  EXPECT_EQ(rows[0].problems.size(), 3u) << rows[0].Detail();
}

TEST_F(PredictionFlags, NonPositiveLogValueFoundAfterOtherCellsAreFine) {
  // -1 parses as a number: the log term refuses it at evaluation, not at reading.
  const std::vector<PredictedRow> rows = Price("a,b,d,g\n5,5,-1,p\n5,5,nan,p\n");
  ASSERT_EQ(rows.size(), 2u);
  EXPECT_EQ(rows[0].flags, std::vector<PredictionFlag>{PredictionFlag::kInvalidValue});
  EXPECT_EQ(rows[0].problems.at(0).column, "d");
  EXPECT_EQ(rows[0].problems.at(0).term, "ld");
  EXPECT_EQ(rows[0].problems.at(0).text, "-1");
  EXPECT_EQ(rows[1].problems.at(0).reason, "is not a finite number");
}

TEST_F(PredictionFlags, WithoutWeightsColumnTheWeightIsOne) {
  const std::vector<PredictedRow> rows = Price("a,b,d,g\n5,5,10,q\n");
  ASSERT_TRUE(rows.at(0).priced());
  EXPECT_EQ(rows[0].weight, 1);
  const double sigma = *fitted_.fit.criteria.sigma;
  const double t = *Predictor(fitted_.model).t_quantile();
  EXPECT_LT(Relative(rows[0].pi->high - *rows[0].prediction, t * sigma * std::sqrt(1 + *rows[0].leverage)), 1e-12);
}

TEST_F(PredictionFlags, EmptyWeightCellCountsAsOneAndNegativeWeightIsInvalid) {
  const std::vector<PredictedRow> rows = Price("a,b,d,g,w\n5,5,10,q,\n5,5,10,q,1\n5,5,10,q,-2\n5,5,10,q,heavy\n");
  ASSERT_EQ(rows.size(), 4u);
  ASSERT_TRUE(rows[0].priced()) << rows[0].Detail();
  EXPECT_TRUE(rows[0].flags.empty());
  EXPECT_EQ(rows[0].weight, 1);
  EXPECT_EQ(rows[0].pi->high, rows[1].pi->high);
  for (std::size_t i : {2, 3}) {
    EXPECT_EQ(rows[i].flags, std::vector<PredictionFlag>{PredictionFlag::kInvalidValue}) << i;
    EXPECT_EQ(rows[i].problems.at(0).column, "w");
    EXPECT_EQ(rows[i].problems.at(0).term, "");
    EXPECT_NE(rows[i].Detail().find("is not a positive weight (the weights)"), std::string::npos) << rows[i].Detail();
  }
}

TEST_F(PredictionFlags, MissingHeaderColumnNamesFileColumnAndTerm) {
  const auto rows = scratch_.Write("rows.csv", "a,d,g\n5,10,q\n");
  const Predictor predictor(fitted_.model);
  CsvReader reader(rows);
  try {
    PredictionRowEvaluator evaluator(predictor.design(), reader);
    FAIL() << "expected an InputError";
  } catch (const InputError& error) {
    EXPECT_EQ(std::string(error.what()),
              rows.string() + ": no column 'b' in the header; term 'b' of the model needs it");
  }
}

TEST_F(PredictionFlags, NoMaxLeverageMeansNoHiddenExtrapolationFlag) {
  fitted_.model.max_unit_leverage.reset();
  const std::vector<PredictedRow> rows = Price("a,b,d,g\n0.5,9.5,10,p\n");
  EXPECT_TRUE(rows.at(0).flags.empty()) << rows[0].Detail();
}

// ---- logged response ---------------------------------------------------------------------------

TEST(Prediction, LoggedResponseIsBackTransformed) {
  testing::TempDir scratch;
  testing::TestRandom random(99);
  std::ostringstream csv;
  csv << "age,grade,price\n";
  for (int i = 0; i < 120; ++i) {
    const double age = random.Uniform(1, 48);
    const char grade = "ABC"[static_cast<int>(random.Uniform(0, 3))];
    const double log_price = 6.5 - 0.02 * age + (grade == 'A' ? 0.3 : grade == 'B' ? 0.1 : 0) + 0.15 * random.Normal();
    csv << Number(age) << "," << grade << "," << Number(std::exp(log_price)) << "\n";
  }
  const auto data = scratch.Write("data.csv", csv.str());
  DesignSpec spec;
  spec.response = "price";
  spec.response_transform = ResponseTransform::kLog;
  spec.terms = {Numeric("age", "age"), Categorical("grade", "grade", "C")};
  const Fitted fitted = FitAll(data, spec);
  ASSERT_TRUE(fitted.model.smearing_factor);
  // Smearing factor recomputed from the residuals of the fitted rows (no weights here):
  // mean exp(e_i) is about exp(sigma^2 / 2) for normal errors, a bit above 1.
  EXPECT_GT(*fitted.model.smearing_factor, 1.0);
  EXPECT_LT(*fitted.model.smearing_factor, 1.03);

  const Predictor predictor(fitted.model);
  const std::vector<PredictedRow> rows = PriceFile(predictor, scratch.Write("rows.csv", "grade,age\nA,12\nC,40\n"));
  for (const PredictedRow& row : rows) {
    ASSERT_TRUE(row.priced());
    ASSERT_TRUE(row.back);
    EXPECT_EQ(row.back->median, std::exp(*row.prediction));
    EXPECT_EQ(row.back->ci->low, std::exp(row.ci->low));
    EXPECT_EQ(row.back->ci->high, std::exp(row.ci->high));
    EXPECT_EQ(row.back->pi->low, std::exp(row.pi->low));
    EXPECT_EQ(row.back->pi->high, std::exp(row.pi->high));
    EXPECT_EQ(*row.back->mean, std::exp(*row.prediction) * *fitted.model.smearing_factor);
    // The mean of a log-normal exceeds its median.
    EXPECT_GT(*row.back->mean, row.back->median);
  }
  // The log-scale prediction itself: 6.5 - 0.02 * 12 + 0.3 within a few standard errors.
  EXPECT_NEAR(*rows[0].prediction, 6.5 - 0.24 + 0.3, 4 * *rows[0].se_mean);
}

// ---- options and construction -------------------------------------------------------------------

TEST(Prediction, LevelOutsideZeroOneIsRefusedNamingLevel) {
  for (const double level : {0.0, 1.0, -0.5, 1.5, std::nan("")}) {
    PredictionOptions options;
    options.level = level;
    try {
      options.Validate();
      FAIL() << "level " << level << " accepted";
    } catch (const InputError& error) {
      EXPECT_EQ(std::string(error.what()).rfind("level: expected a number strictly between 0 and 1", 0), 0u)
          << error.what();
    }
  }
}

TEST(Prediction, CoefficientColumnNotInTheDesignIsRefused) {
  testing::TempDir scratch;
  const auto data = scratch.Write("data.csv", RichCsv(3, 60));
  Fitted fitted = FitAll(data, RichSpec());
  fitted.model.column_names[1] = "no_such_column";
  try {
    const Predictor predictor(fitted.model);
    FAIL() << "expected an InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("'no_such_column'"), std::string::npos) << error.what();
  }
}

TEST(Prediction, EvaluateTermsReportsTheFirstNonPositiveLogTerm) {
  testing::TempDir scratch;
  const auto data = scratch.Write("data.csv", RichCsv(4, 30));
  const Design design = BuildDesign(RichSpec(), ProfileCsv(data, CsvOptions{}));
  std::vector<double> values(design.source.cells.size(), 1.0);
  std::vector<std::size_t> levels(design.source.cells.size(), kNoTerm);
  std::vector<double> x(design.column_count(), -7.0);
  EXPECT_EQ(design.EvaluateTerms(values, levels, x), kNoTerm);
  EXPECT_EQ(x[0], 1.0);  // intercept
  const std::size_t log_term = design.FindTerm("ld");
  values[static_cast<std::size_t>(design.source.term_cell[log_term])] = 0.0;
  EXPECT_EQ(design.EvaluateTerms(values, levels, x), log_term);
}

// Row details are read by people: their numbers follow the one number policy
// (number_format.h: 4 significant digits, thousands separators; common practice).
TEST(Prediction, RowDetailNumbersFollowTheNumberPolicy) {
  OutsideRange outside;
  outside.column = "list_price";
  outside.value = 1234567.8;
  outside.min = 0.0123456;
  outside.max = 1000000;
  EXPECT_EQ(outside.Describe(), "list_price = 1,234,568 outside [0.01235, 1,000,000]");
  outside.kind = TermKind::kPower;
  outside.degree = 2;
  outside.term = "price2";
  EXPECT_EQ(outside.Describe(), "list_price^2 = 1,234,568 outside [0.01235, 1,000,000] (power term 'price2')");

  PredictedRow row;
  row.flags = {PredictionFlag::kHiddenExtrapolation};
  row.leverage = 0.123456;
  row.max_fitted_leverage = 0.0456789;
  EXPECT_NE(row.Detail().find("leverage 0.1235 is above 0.04568,"), std::string::npos) << row.Detail();
}

}  // namespace
}  // namespace stepledger

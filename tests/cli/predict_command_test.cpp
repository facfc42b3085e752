// `stepledger predict` end to end: a plan is run through `select` (method none) on invented
// random data with numeric, log, power, categorical and product terms, the audit is written,
// and new rows are priced from the audit alone.
//  - Intervals against Debian python3-statsmodels 0.13 OLS and WLS get_prediction(...)
//    .summary_frame(alpha) on the same data (tests/cli/statsmodels_predict.py builds the design
//    by hand in numpy): fit, se of the mean, confidence and prediction intervals to 1e-9
//    relative. Skips when /usr/bin/python3 cannot import statsmodels.
//  - Each flag on a row built for it and absent on ordinary rows; input order and ids kept.
//  - A logged response: exp of the log-scale numbers, and the smearing factor recomputed here
//    from the fitted rows' residuals.
//  - Errors (exit 2, one line naming the place): a needed column missing from the header, a bad
//    --level, an --id column that is not in the header, an existing --out without --force.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/csv_text.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

constexpr double kRelativeTolerance = 1e-9;

std::string Number(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

// Invented true model: y = 20 + 0.8 a - 0.3 b + 1.5 ln d + 0.05 a^2 + (g=q) (1 + 0.2 a) - (g=r) 0.5
// + e / sqrt(w), with b = a + noise (strongly correlated with a) and a `noise` column of no
// signal that the plans keep out ("never").
std::string MakeData(std::uint64_t seed, int rows, bool log_response = false) {
  testing::TestRandom random(seed);
  std::ostringstream csv;
  csv << "id,a,b,d,g,noise,w,y\n";
  for (int i = 0; i < rows; ++i) {
    const double a = random.Uniform(0, 10);
    const double b = a + 0.3 * random.Normal();
    const double d = random.Uniform(1, 50);
    const char g = "pqr"[static_cast<int>(random.Uniform(0, 3))];
    const double noise = random.Normal();
    const double w = random.Uniform(0.5, 2);
    const double mean = 20 + 0.8 * a - 0.3 * b + 1.5 * std::log(d) + 0.05 * a * a +
                        (g == 'q' ? 1 + 0.2 * a : 0) - (g == 'r' ? 0.5 : 0);
    const double y = log_response ? std::exp(mean / 10 + 0.1 * random.Normal())
                                  : mean + 0.7 * random.Normal() / std::sqrt(w);
    csv << "D" << i << "," << Number(a) << "," << Number(b) << "," << Number(d) << "," << g << ","
        << Number(noise) << "," << Number(w) << "," << Number(y) << "\n";
  }
  return csv.str();
}

std::string Plan(bool weighted, bool log_response = false) {
  return std::string(R"({"response": "y",)") + (weighted ? R"( "weights": "w",)" : "") +
         (log_response ? R"( "response_transform": "log",)" : "") + R"(
    "terms": [
      {"name": "a", "column": "a"},
      {"name": "b", "column": "b"},
      {"name": "ld", "log": "d"},
      {"name": "a2", "power": {"column": "a", "degree": 2}},
      {"name": "g", "categorical": "g", "baseline": "p"},
      {"name": "a:g", "product": ["a", "g"]},
      {"name": "noise", "column": "noise"}
    ],
    "never": ["noise"],
    "method": "none"})";
}

// New rows: ids, columns in another order than the data, no y and no noise column.
std::string MakeRows(std::uint64_t seed, int rows) {
  testing::TestRandom random(seed);
  std::ostringstream csv;
  csv << "g,w,d,b,a,id\n";
  for (int i = 0; i < rows; ++i) {
    const double a = random.Uniform(-1, 11);  // a few just outside the data
    const double b = a + 0.3 * random.Normal();
    csv << "pqr"[static_cast<int>(random.Uniform(0, 3))] << "," << Number(random.Uniform(0.25, 3)) << ","
        << Number(random.Uniform(0.8, 60)) << "," << Number(b) << "," << Number(a) << ",N" << i << "\n";
  }
  return csv.str();
}

// Runs select on the data and returns the audit's path.
std::filesystem::path MakeAudit(const testing::TempDir& scratch, const std::filesystem::path& data,
                                const std::string& plan, const std::string& name = "run") {
  const auto plan_file = scratch.Write(name + ".json", plan);
  const auto out = scratch.path() / name;
  const testing::CliRun run =
      testing::RunStepledger({"select", data.string(), "--plan", plan_file.string(), "--out", out.string()});
  EXPECT_EQ(run.status, 0) << run.err;
  return out / "audit.json";
}

struct CsvTable {
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
  std::string At(std::size_t row, const std::string& column) const {
    const auto found = std::find(header.begin(), header.end(), column);
    if (found == header.end()) return "<no column " + column + ">";
    return rows.at(row).at(static_cast<std::size_t>(found - header.begin()));
  }
};

CsvTable ParseCsv(const std::string& text) {
  CsvTable table;
  std::istringstream stream(text);
  std::string line;
  std::getline(stream, line);
  table.header = testing::SplitCsvLine(line);
  while (std::getline(stream, line)) table.rows.push_back(testing::SplitCsvLine(line));
  return table;
}

double RelativeError(double computed, double reference) {
  return std::abs(computed - reference) / std::max(std::abs(reference), 1e-300);
}

// ---- statsmodels -----------------------------------------------------------------------------

struct ReferenceCase {
  const char* name;
  bool weighted;
  double level;
  std::uint64_t seed;
  int rows;
};

void PrintTo(const ReferenceCase& value, std::ostream* out) { *out << value.name; }

class PredictAgainstStatsmodels : public ::testing::TestWithParam<ReferenceCase> {};

TEST_P(PredictAgainstStatsmodels, IntervalsAgreeWithGetPrediction) {
  const ReferenceCase& reference_case = GetParam();
  const std::string source = std::string("Debian python3-statsmodels 0.13 ") +
                             (reference_case.weighted ? "WLS" : "OLS") + " get_prediction";
  if (!testing::PythonHasModules("numpy,statsmodels")) {
    GTEST_SKIP() << testing::ReferencePython() << " cannot import statsmodels; " << source
                 << " reference not available";
  }
  testing::TempDir scratch;
  const auto data = scratch.Write("data.csv", MakeData(reference_case.seed, reference_case.rows));
  const auto rows = scratch.Write("rows.csv", MakeRows(reference_case.seed + 1, 40));
  const auto audit = MakeAudit(scratch, data, Plan(reference_case.weighted));

  const testing::CliRun run = testing::RunStepledger(
      {"predict", audit.string(), rows.string(), "--json", "--id", "id", "--level", Number(reference_case.level)});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json result = nlohmann::json::parse(run.out);

  const std::string script = (testing::SourceDir() / "tests/cli/statsmodels_predict.py").string();
  std::string reference_text;
  ASSERT_EQ(testing::RunCommand("'" + testing::ReferencePython() + "' '" + script + "' '" + data.string() +
                                    "' '" + rows.string() + "' " + (reference_case.weighted ? "1" : "0") + " " +
                                    Number(1 - reference_case.level),
                                &reference_text),
            0)
      << "the reference script failed";
  const nlohmann::json reference = nlohmann::json::parse(reference_text);

  ASSERT_EQ(result["rows"].size(), 40u);
  double worst = 0;
  auto check = [&](const nlohmann::json& computed, const nlohmann::json& expected, const std::string& what) {
    ASSERT_TRUE(computed.is_number()) << what << " is " << computed.dump();
    const double error = RelativeError(computed.get<double>(), expected.get<double>());
    worst = std::max(worst, error);
    EXPECT_LE(error, kRelativeTolerance) << what << ": stepledger " << Number(computed.get<double>()) << " vs "
                                         << source << " " << Number(expected.get<double>());
  };
  for (std::size_t i = 0; i < 40; ++i) {
    const nlohmann::json& row = result["rows"][i];
    const std::string where = "row " + std::to_string(i + 1);
    EXPECT_EQ(row["row"], i + 1);
    EXPECT_EQ(row["line"], i + 2);
    EXPECT_EQ(row["id"], "N" + std::to_string(i)) << "input order and ids kept";
    check(row["prediction"], reference["mean"][i], where + " prediction");
    check(row["se_mean"], reference["mean_se"][i], where + " se_mean");
    check(row["ci_low"], reference["mean_ci_lower"][i], where + " ci_low");
    check(row["ci_high"], reference["mean_ci_upper"][i], where + " ci_high");
    check(row["pi_low"], reference["obs_ci_lower"][i], where + " pi_low");
    check(row["pi_high"], reference["obs_ci_upper"][i], where + " pi_high");
  }
  std::printf("[ measured ] %s: largest relative difference from %s: %.2e\n", reference_case.name,
              source.c_str(), worst);
  EXPECT_EQ(result["level"].get<double>(), reference_case.level);
  EXPECT_EQ(result["response_transform"], "none");
  EXPECT_TRUE(result["back_transform_method"].is_null());
  EXPECT_EQ(result["weights_read"], reference_case.weighted);
}

const ReferenceCase kReferenceCases[] = {
    {"Unweighted95", false, 0.95, 41, 120},
    {"Weighted95", true, 0.95, 42, 300},
    {"Weighted80", true, 0.80, 43, 60},
};

INSTANTIATE_TEST_SUITE_P(RandomDesigns, PredictAgainstStatsmodels, ::testing::ValuesIn(kReferenceCases),
                         [](const ::testing::TestParamInfo<ReferenceCase>& info) {
                           return std::string(info.param.name);
                         });

// ---- flags, order and ids ----------------------------------------------------------------------

class PredictCommand : public ::testing::Test {
 protected:
  void SetUp() override {
    data_ = scratch_.Write("data.csv", MakeData(7, 200));
    audit_ = MakeAudit(scratch_, data_, Plan(true));
  }
  testing::TempDir scratch_;
  std::filesystem::path data_, audit_;
};

TEST_F(PredictCommand, EachFlagOnTheRowBuiltForItInInputOrderWithIds) {
  // One row per flag between ordinary rows; the column order differs from the data's.
  const auto rows = scratch_.Write("rows.csv",
                                   "id,a,b,d,g,w\n"
                                   "ok-1,5,5,10,q,1\n"
                                   "far-a,25,5,10,p,1\n"            // a outside (and a^2)
                                   "far-d,5,5,400,r,1\n"            // d outside (log term)
                                   "hidden,0.5,9.5,10,p,1\n"         // a, b in range, far apart
                                   "level,5,5,10,z,1\n"             // unknown level
                                   "gap,5,NA,10,q,1\n"              // missing
                                   "text,5,5,ten,q,\n"              // invalid value (w empty: 1)
                                   "\"ok, 2\",3,3,20,r,2\n");
  const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--id", "id"});
  ASSERT_EQ(run.status, 0) << run.err;
  const CsvTable table = ParseCsv(run.out);
  EXPECT_EQ(table.header, (std::vector<std::string>{"row", "line", "id", "prediction", "se_mean", "ci_low",
                                                    "ci_high", "pi_low", "pi_high", "leverage", "flags",
                                                    "detail"}));
  ASSERT_EQ(table.rows.size(), 8u);
  const std::vector<std::string> ids = {"ok-1", "far-a", "far-d", "hidden", "level", "gap", "text", "ok, 2"};
  const std::vector<std::string> flags = {"",        "outside-range", "outside-range", "hidden-extrapolation",
                                          "unknown-level", "missing", "invalid-value", ""};
  for (std::size_t i = 0; i < 8; ++i) {
    EXPECT_EQ(table.At(i, "row"), std::to_string(i + 1));
    EXPECT_EQ(table.At(i, "line"), std::to_string(i + 2));
    EXPECT_EQ(table.At(i, "id"), ids[i]);
    EXPECT_EQ(table.At(i, "flags"), flags[i]) << ids[i] << ": " << table.At(i, "detail");
    const bool priced = i < 4 || i == 7;
    EXPECT_EQ(table.At(i, "prediction").empty(), !priced) << ids[i];
    EXPECT_EQ(table.At(i, "pi_high").empty(), !priced) << ids[i];
  }
  EXPECT_NE(table.At(1, "detail").find("a = 25 outside ["), std::string::npos) << table.At(1, "detail");
  EXPECT_NE(table.At(2, "detail").find("d = 400 outside [1."), std::string::npos) << table.At(2, "detail");
  EXPECT_NE(table.At(2, "detail").find("(log term 'ld')"), std::string::npos);
  EXPECT_NE(table.At(3, "detail").find(", the largest among the fitted rows, though every column is in range"), std::string::npos);
  EXPECT_NE(table.At(4, "detail").find("g: level 'z' was not in the fitted data"), std::string::npos);
  EXPECT_NE(table.At(5, "detail").find("b is missing (term 'b')"), std::string::npos);
  EXPECT_NE(table.At(6, "detail").find("d: 'ten' is not a number (term 'ld')"), std::string::npos);
  EXPECT_EQ(run.err,
            "predict: model y explained by a, b, ld, a2, g, a:g, weighted by w\n"
            "predict: 8 rows, 5 priced; outside-range 2, hidden-extrapolation 1, unknown-level 1, missing 1, "
            "invalid-value 1\n");
}

TEST_F(PredictCommand, JsonRowsCarryFlagsProblemsAndTheSummary) {
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g,w\n5,5,10,q,1\n0.5,9.5,10,p,1\n5,5,10,z,1\n");
  const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json result = nlohmann::json::parse(run.out);
  EXPECT_EQ(result["response"], "y");
  EXPECT_EQ(result["level"], 0.95);
  ASSERT_EQ(result["rows"].size(), 3u);
  EXPECT_EQ(result["rows"][0]["flags"], nlohmann::json::array());
  EXPECT_FALSE(result["rows"][0].contains("id"));
  EXPECT_EQ(result["rows"][1]["flags"], nlohmann::json({"hidden-extrapolation"}));
  EXPECT_GT(result["rows"][1]["leverage"].get<double>(), result["max_unit_leverage"].get<double>());
  EXPECT_LT(result["rows"][0]["leverage"].get<double>(), result["max_unit_leverage"].get<double>());
  EXPECT_EQ(result["rows"][2]["flags"], nlohmann::json({"unknown-level"}));
  EXPECT_TRUE(result["rows"][2]["prediction"].is_null());
  EXPECT_EQ(result["rows"][2]["problems"][0]["column"], "g");
  EXPECT_EQ(result["rows"][2]["problems"][0]["text"], "z");
  EXPECT_EQ(result["rows"][2]["problems"][0]["where"], rows.string() + ":4:8");
  EXPECT_EQ(result["summary"]["rows"], 3);
  EXPECT_EQ(result["summary"]["priced"], 2);
  EXPECT_EQ(result["summary"]["flags"]["hidden-extrapolation"], 1);
  EXPECT_EQ(result["summary"]["flags"]["unknown-level"], 1);
  EXPECT_EQ(result["summary"]["flags"]["outside-range"], 0);
}

TEST_F(PredictCommand, FittedRowsPricedAgainCarryNoFlag) {
  // The data file itself (it has every column, the response too): every row is within its
  // ranges and at or below the largest leverage.
  const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), data_.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json result = nlohmann::json::parse(run.out);
  ASSERT_EQ(result["rows"].size(), 200u);
  for (const auto& row : result["rows"]) EXPECT_EQ(row["flags"], nlohmann::json::array()) << row["detail"];
  EXPECT_EQ(run.err, "predict: model y explained by a, b, ld, a2, g, a:g, weighted by w\n"
            "predict: 200 rows, 200 priced; outside-range 0, hidden-extrapolation 0, unknown-level 0, "
                     "missing 0, invalid-value 0\n");
}

TEST_F(PredictCommand, OutWritesTheFileAndRefusesToOverwriteWithoutForce) {
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g\n5,5,10,q\n");
  const auto out = scratch_.path() / "priced.csv";
  testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--out", out.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(run.out, "");
  std::ifstream written(out);
  std::stringstream text;
  text << written.rdbuf();
  EXPECT_EQ(text.str().rfind("row,line,prediction,", 0), 0u) << text.str();
  EXPECT_EQ(ParseCsv(text.str()).rows.size(), 1u);

  run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--out", out.string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find(out.string()), std::string::npos) << run.err;
  run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--out", out.string(), "--force"});
  EXPECT_EQ(run.status, 0) << run.err;
}

TEST(PredictInterceptOnly, ReadsNoColumnAndGivesTheWeightedMean) {
  // Forward selection by BIC on a response with no signal keeps no term: the model is the
  // intercept alone, which needs no column of the rows (the weights are read when present).
  testing::TempDir scratch;
  testing::TestRandom random(3);
  std::ostringstream csv;
  csv << "x,w,y\n";
  double weighted_sum = 0, weight_sum = 0;
  for (int i = 0; i < 50; ++i) {
    const double x = random.Uniform(0, 1), w = random.Uniform(0.5, 2), y = 10 + random.Normal();
    weighted_sum += w * y;
    weight_sum += w;
    csv << Number(x) << "," << Number(w) << "," << Number(y) << "\n";
  }
  const auto data = scratch.Write("data.csv", csv.str());
  const auto audit = MakeAudit(scratch, data,
                               R"({"response": "y", "weights": "w", "terms": [{"name": "x", "column": "x"}],
                                   "method": "forward", "criterion": "bic", "keep": []})");
  const auto rows = scratch.Write("rows.csv", "w\n2\n");
  const testing::CliRun run = testing::RunStepledger({"predict", audit.string(), rows.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json result = nlohmann::json::parse(run.out);
  const nlohmann::json& row = result["rows"][0];
  if (row["flags"] != nlohmann::json::array()) FAIL() << row["detail"];
  // Common practice: the intercept-only WLS fit is the weighted mean, with x0'(X'WX)^-1 x0 = 1/sum w.
  EXPECT_LT(RelativeError(row["prediction"].get<double>(), weighted_sum / weight_sum), 1e-12);
  EXPECT_LT(RelativeError(row["leverage"].get<double>(), 1 / weight_sum), 1e-12);
  EXPECT_EQ(row["weight"], 2.0);
}

// ---- logged response ---------------------------------------------------------------------------

TEST(PredictLogResponse, BackTransformAndSmearingFactor) {
  testing::TempDir scratch;
  const auto data = scratch.Write("data.csv", MakeData(11, 150, /*log_response=*/true));
  const auto audit = MakeAudit(scratch, data, Plan(false, true));

  // The smearing factor recomputed here: the fitted rows priced again give x_i'b; with no
  // weights the factor is the mean of exp(ln y_i - x_i'b) (Duan's smearing estimate).
  testing::CliRun run = testing::RunStepledger({"predict", audit.string(), data.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json fitted = nlohmann::json::parse(run.out);
  std::istringstream data_lines(MakeData(11, 150, true));
  std::string line;
  std::getline(data_lines, line);
  double sum = 0;
  std::size_t count = 0;
  while (std::getline(data_lines, line)) {
    const double y = std::stod(testing::SplitCsvLine(line).back());
    sum += std::exp(std::log(y) - fitted["rows"][count]["prediction"].get<double>());
    ++count;
  }
  ASSERT_EQ(count, 150u);
  const double smearing = sum / static_cast<double>(count);
  EXPECT_LT(RelativeError(fitted["smearing_factor"].get<double>(), smearing), 1e-12);
  EXPECT_EQ(fitted["response_transform"], "log");
  EXPECT_NE(fitted["back_transform_method"].get<std::string>().find("smearing"), std::string::npos);

  const auto rows = scratch.Write("rows.csv", "a,b,d,g\n5,5,10,q\n2,2.2,30,p\n");
  run = testing::RunStepledger({"predict", audit.string(), rows.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  const CsvTable table = ParseCsv(run.out);
  ASSERT_EQ(table.rows.size(), 2u);
  for (std::size_t i = 0; i < 2; ++i) {
    auto value = [&](const std::string& column) { return std::stod(table.At(i, column)); };
    EXPECT_LT(RelativeError(value("exp_prediction"), std::exp(value("prediction"))), 1e-15);
    EXPECT_LT(RelativeError(value("exp_ci_low"), std::exp(value("ci_low"))), 1e-15);
    EXPECT_LT(RelativeError(value("exp_ci_high"), std::exp(value("ci_high"))), 1e-15);
    EXPECT_LT(RelativeError(value("exp_pi_low"), std::exp(value("pi_low"))), 1e-15);
    EXPECT_LT(RelativeError(value("exp_pi_high"), std::exp(value("pi_high"))), 1e-15);
    EXPECT_LT(RelativeError(value("mean_smearing"), std::exp(value("prediction")) * smearing), 1e-12);
    EXPECT_GT(value("mean_smearing"), value("exp_prediction"));
  }
  EXPECT_NE(run.err.find("was logged"), std::string::npos) << run.err;
  // The price on the response's own scale comes first; the model is stated with its transform.
  EXPECT_EQ(run.out.rfind("row,line,exp_prediction,exp_ci_low,exp_ci_high,exp_pi_low,exp_pi_high,"
                          "mean_smearing,prediction,",
                          0),
            0u)
      << run.out.substr(0, 200);
  EXPECT_NE(run.err.find("predict: model log(y) explained by a, b, ld, a2, g, a:g\n"), std::string::npos)
      << run.err;
}

// ---- an audit that does not verify ------------------------------------------------------------

TEST_F(PredictCommand, RefusesAnAuditWhoseDigestsDoNotHoldUnlessAllowed) {
  nlohmann::json edited = nlohmann::json::parse(testing::ReadText(audit_));
  edited["model"]["coefficients"][1]["estimate"] = 1000.0;
  const auto edited_path = scratch_.Write("edited.json", edited.dump(2));
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g,w\n5,5,10,q,1\n");

  testing::CliRun run = testing::RunStepledger({"predict", edited_path.string(), rows.string()});
  EXPECT_EQ(run.status, 1);
  EXPECT_EQ(run.out, "") << "nothing priced";
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("edited.json does not verify (key 'model'"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("--allow-unverified"), std::string::npos) << run.err;

  run = testing::RunStepledger({"predict", edited_path.string(), rows.string(), "--allow-unverified"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(run.out.rfind("# warning: " + edited_path.string() + " does not verify", 0), 0u) << run.out;
  EXPECT_NE(run.err.find("does not verify"), std::string::npos) << run.err;

  run = testing::RunStepledger({"predict", edited_path.string(), rows.string(), "--allow-unverified", "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json json = nlohmann::json::parse(run.out);
  ASSERT_TRUE(json["warning"].is_string()) << json.dump().substr(0, 300);
  EXPECT_NE(json["warning"].get<std::string>().find("does not verify"), std::string::npos);

  // The audit as written verifies: no warning.
  run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_TRUE(nlohmann::json::parse(run.out)["warning"].is_null());
}

TEST_F(PredictCommand, OffersNoThreadsOption) {
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g,w\n5,5,10,q,1\n");
  const testing::CliRun run =
      testing::RunStepledger({"predict", audit_.string(), rows.string(), "--threads", "2"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--threads"), std::string::npos) << run.err;
}

// ---- errors --------------------------------------------------------------------------------------

TEST_F(PredictCommand, NeededColumnMissingFromTheHeaderNamesFileColumnAndTerm) {
  const auto rows = scratch_.Write("rows.csv", "a,b,g\n5,5,q\n");
  const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string()});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find(rows.string() + ": no column 'd' in the header; term 'ld' of the model needs it"),
            std::string::npos)
      << run.err;
  EXPECT_EQ(run.out, "");
}

TEST_F(PredictCommand, LevelOutsideZeroOneNamesTheOption) {
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g\n5,5,10,q\n");
  for (const std::string level : {"0", "1", "1.5", "-0.2"}) {
    const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--level", level});
    EXPECT_EQ(run.status, 2) << level;
    ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
    EXPECT_NE(run.err.find("--level"), std::string::npos) << run.err;
    EXPECT_EQ(run.out, "");
  }
  const testing::CliRun text = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--level", "high"});
  EXPECT_EQ(text.status, 2);
  EXPECT_NE(text.err.find("--level"), std::string::npos) << text.err;
}

TEST_F(PredictCommand, UnknownIdColumnNamesIt) {
  const auto rows = scratch_.Write("rows.csv", "a,b,d,g\n5,5,10,q\n");
  const testing::CliRun run = testing::RunStepledger({"predict", audit_.string(), rows.string(), "--id", "sku"});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find(rows.string() + ": no column 'sku' in the header (named by --id)"), std::string::npos)
      << run.err;
}

TEST_F(PredictCommand, HelpTeachesColumnsFlagsAndAnExample) {
  const testing::CliRun run = testing::RunStepledger({"predict", "--help"});
  EXPECT_EQ(run.status, 0);
  const std::string help = run.out + run.err;
  for (const char* text : {"outside-range", "hidden-extrapolation", "unknown-level", "missing", "invalid-value",
                           "se_mean", "pi_low", "mean_smearing", "smearing factor", "Example:"}) {
    EXPECT_NE(help.find(text), std::string::npos) << text;
  }
}

}  // namespace
}  // namespace stepledger

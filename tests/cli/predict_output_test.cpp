// What `stepledger predict` writes, as it streams the rows:
//  - every number in the CSV reads back to exactly the double the JSON output carries (the
//    JSON is nlohmann::json's round-trip form) and is the shortest text that does so: one
//    significant digit fewer never reads back to the same double;
//  - the JSON document streamed row by row is one valid document, the summary at the end;
//  - an error in the middle of the rows leaves no --out file and no temporary beside it;
//  - a rows file with a header only gives the header (CSV) or an empty "rows" (JSON).
// Invented data whose true model the test knows: y = 50 + 2 a - 3 ln d + (g = q) 4 + noise.

#include <gtest/gtest.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/csv_text.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

std::string MakeData(std::uint64_t seed, int rows, bool log_response) {
  testing::TestRandom random(seed);
  std::ostringstream csv;
  csv.precision(17);
  csv << "a,d,g,w,y\n";
  for (int i = 0; i < rows; ++i) {
    const double a = random.Uniform(0, 10), d = random.Uniform(1, 40), w = random.Uniform(0.5, 2);
    const bool q = random.Uniform(0, 1) < 0.5;
    const double mean = 50 + 2 * a - 3 * std::log(d) + (q ? 4 : 0);
    const double y = log_response ? std::exp(mean / 20 + 0.05 * random.Normal()) : mean + random.Normal();
    csv << a << "," << d << "," << (q ? "q" : "p") << "," << w << "," << y << "\n";
  }
  return csv.str();
}

std::string Plan(bool log_response) {
  return std::string(R"({"response": "y", "weights": "w",)") +
         (log_response ? R"( "response_transform": "log",)" : "") + R"(
    "terms": [{"name": "a", "column": "a"}, {"name": "ld", "log": "d"},
              {"name": "g", "categorical": "g", "baseline": "p"}],
    "method": "none"})";
}

std::filesystem::path MakeAudit(const testing::TempDir& scratch, bool log_response) {
  const auto data = scratch.Write("data.csv", MakeData(21, 120, log_response));
  const auto plan = scratch.Write("plan.json", Plan(log_response));
  const auto out = scratch.path() / "run";
  const testing::CliRun run =
      testing::RunStepledger({"select", data.string(), "--plan", plan.string(), "--out", out.string()});
  EXPECT_EQ(run.status, 0) << run.err;
  return out / "audit.json";
}

// New rows: values with many digits, some outside the data, one that cannot be priced.
std::string MakeRows(std::uint64_t seed, int rows) {
  testing::TestRandom random(seed);
  std::ostringstream csv;
  csv.precision(17);
  csv << "id,a,d,g,w\n";
  for (int i = 0; i < rows; ++i) {
    csv << "R" << i << "," << random.Uniform(-2, 12) << "," << random.Uniform(0.5, 45) << ","
        << (i % 2 == 0 ? "p" : "q") << "," << random.Uniform(0.25, 3) << "\n";
  }
  csv << "bad,1,NA,p,1\n";
  return csv.str();
}

int FileCount(const std::filesystem::path& folder) {
  int count = 0;
  for ([[maybe_unused]] const auto& entry : std::filesystem::directory_iterator(folder)) ++count;
  return count;
}

// Significant digits of a number's text ("-1.2500e-3" has 5; leading zeros do not count).
int SignificantDigits(const std::string& text) {
  const std::string mantissa = text.substr(0, text.find_first_of("eE"));
  std::string digits;
  for (const char c : mantissa) {
    if (c >= '0' && c <= '9') digits += c;
  }
  const std::size_t first = digits.find_first_not_of('0');
  return first == std::string::npos ? 1 : static_cast<int>(digits.size() - first);
}

// The CSV cell against the JSON value: the same double exactly, and no shorter text reads back
// to it (%.{n-1}g rounds to the nearest, so if any (n-1)-digit text did, that one would).
void ExpectShortestExact(const std::string& cell, double json_value, const std::string& what) {
  double parsed = 0;
  const auto result = std::from_chars(cell.data(), cell.data() + cell.size(), parsed);
  ASSERT_TRUE(result.ec == std::errc() && result.ptr == cell.data() + cell.size()) << what << ": '" << cell << "'";
  EXPECT_EQ(parsed, json_value) << what << ": '" << cell << "' does not read back to the computed value";
  const int digits = SignificantDigits(cell);
  if (digits > 1) {
    char shorter[400];
    std::snprintf(shorter, sizeof shorter, "%.*g", digits - 1, parsed);
    EXPECT_NE(std::strtod(shorter, nullptr), parsed)
        << what << ": '" << cell << "' is not the shortest form; '" << shorter << "' reads back the same";
  }
}

class PredictOutput : public ::testing::TestWithParam<bool> {};

TEST_P(PredictOutput, EveryCsvNumberIsTheComputedDoubleInItsShortestForm) {
  const bool log_response = GetParam();
  testing::TempDir scratch;
  const auto audit = MakeAudit(scratch, log_response);
  const auto rows = scratch.Write("rows.csv", MakeRows(22, 300));
  const testing::CliRun csv = testing::RunStepledger({"predict", audit.string(), rows.string(), "--id", "id"});
  ASSERT_EQ(csv.status, 0) << csv.err;
  const testing::CliRun json = testing::RunStepledger({"predict", audit.string(), rows.string(), "--json"});
  ASSERT_EQ(json.status, 0) << json.err;
  const nlohmann::json document = nlohmann::json::parse(json.out);

  const auto records = testing::ParseCsvRecords(csv.out);
  ASSERT_EQ(records.size(), 302u);  // header, 300 rows, the bad one
  const std::vector<std::string>& header = records[0];
  // Each numeric CSV column and where the JSON row holds the same number.
  const std::vector<std::pair<std::string, nlohmann::json::json_pointer>> columns = {
      {"prediction", nlohmann::json::json_pointer("/prediction")},
      {"se_mean", nlohmann::json::json_pointer("/se_mean")},
      {"ci_low", nlohmann::json::json_pointer("/ci_low")},
      {"ci_high", nlohmann::json::json_pointer("/ci_high")},
      {"pi_low", nlohmann::json::json_pointer("/pi_low")},
      {"pi_high", nlohmann::json::json_pointer("/pi_high")},
      {"leverage", nlohmann::json::json_pointer("/leverage")},
      {"exp_prediction", nlohmann::json::json_pointer("/back_transformed/median")},
      {"exp_ci_low", nlohmann::json::json_pointer("/back_transformed/ci_low")},
      {"exp_ci_high", nlohmann::json::json_pointer("/back_transformed/ci_high")},
      {"exp_pi_low", nlohmann::json::json_pointer("/back_transformed/pi_low")},
      {"exp_pi_high", nlohmann::json::json_pointer("/back_transformed/pi_high")},
      {"mean_smearing", nlohmann::json::json_pointer("/back_transformed/mean")}};
  int checked = 0, shorter_than_17 = 0;
  for (const auto& [column, pointer] : columns) {
    const auto found = std::find(header.begin(), header.end(), column);
    if (found == header.end()) {
      const bool back_transformed = column.rfind("exp_", 0) == 0 || column == "mean_smearing";
      EXPECT_TRUE(!log_response && back_transformed) << "no column " << column;
      continue;
    }
    const auto index = static_cast<std::size_t>(found - header.begin());
    for (std::size_t row = 0; row + 1 < records.size(); ++row) {
      const std::string& cell = records[row + 1].at(index);
      const nlohmann::json& json_row = document["rows"][row];
      if (!json_row.contains(pointer) || json_row[pointer].is_null()) {
        EXPECT_EQ(cell, "") << column << " row " << row + 1;
        continue;
      }
      ExpectShortestExact(cell, json_row[pointer].get<double>(), column + " row " + std::to_string(row + 1));
      ++checked;
      if (SignificantDigits(cell) < 17) ++shorter_than_17;
    }
  }
  EXPECT_GE(checked, 300 * 7);  // 7 numbers per priced row, 13 with a logged response
  // Not %.17g: about half of arbitrary doubles need only 16 digits or fewer.
  EXPECT_GT(shorter_than_17, checked / 4) << "of " << checked;
  EXPECT_EQ(records.back()[header.size() - 2], "missing");
}

INSTANTIATE_TEST_SUITE_P(Response, PredictOutput, ::testing::Bool(),
                         [](const ::testing::TestParamInfo<bool>& info) {
                           return std::string(info.param ? "Logged" : "AsIs");
                         });

TEST(PredictStreaming, JsonDocumentHasEveryRowAndTheSummaryLast) {
  testing::TempDir scratch;
  const auto audit = MakeAudit(scratch, false);
  const auto rows = scratch.Write("rows.csv", MakeRows(23, 40));
  const testing::CliRun run = testing::RunStepledger({"predict", audit.string(), rows.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json document = nlohmann::json::parse(run.out);
  ASSERT_EQ(document["rows"].size(), 41u);
  for (std::size_t i = 0; i < 41; ++i) EXPECT_EQ(document["rows"][i]["row"], i + 1);
  EXPECT_EQ(document["summary"]["rows"], 41);
  EXPECT_EQ(document["summary"]["priced"], 40);
  EXPECT_EQ(document["summary"]["flags"]["missing"], 1);
  // Written as a whole document would be dumped: keys in order, indent 2.
  EXPECT_EQ(run.out, document.dump(2) + "\n");
  EXPECT_LT(run.out.find("\"rows\": ["), run.out.find("\"summary\": {"));
}

TEST(PredictStreaming, HeaderOnlyRowsGiveAHeaderOrNoRows) {
  testing::TempDir scratch;
  const auto audit = MakeAudit(scratch, false);
  const auto rows = scratch.Write("rows.csv", "a,d,g\n");
  testing::CliRun run = testing::RunStepledger({"predict", audit.string(), rows.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(run.out, "row,line,prediction,se_mean,ci_low,ci_high,pi_low,pi_high,leverage,flags,detail\n");
  run = testing::RunStepledger({"predict", audit.string(), rows.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const nlohmann::json document = nlohmann::json::parse(run.out);
  EXPECT_EQ(document["rows"], nlohmann::json::array());
  EXPECT_EQ(document["summary"]["rows"], 0);
  EXPECT_EQ(run.out, document.dump(2) + "\n");
}

TEST(PredictStreaming, AnErrorInTheRowsLeavesNoOutFileAndNoTemporary) {
  testing::TempDir scratch;
  const auto audit = MakeAudit(scratch, false);
  // A ragged record after a few good ones: found only while streaming.
  std::string text = MakeRows(24, 5000);
  text += "late,1,2\n";
  const auto rows = scratch.Write("rows.csv", text);
  const auto folder = scratch.path() / "priced";
  std::filesystem::create_directory(folder);
  for (const bool json : {false, true}) {
    std::vector<std::string> args = {"predict", audit.string(), rows.string(), "--out", (folder / "p.csv").string()};
    if (json) args.push_back("--json");
    const testing::CliRun run = testing::RunStepledger(args);
    EXPECT_EQ(run.status, 2) << run.err;
    ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
    EXPECT_NE(run.err.find(rows.string() + ":5003:"), std::string::npos) << run.err;
    EXPECT_EQ(FileCount(folder), 0) << "a half-written output or its temporary was left";
  }
  // An existing --out is refused before any row is read, and stays as it was.
  const auto existing = scratch.Write("old.csv", "previous");
  const testing::CliRun clash =
      testing::RunStepledger({"predict", audit.string(), rows.string(), "--out", existing.string()});
  EXPECT_EQ(clash.status, 2);
  EXPECT_NE(clash.err.find(existing.string() + ": file exists; use --force to overwrite"), std::string::npos)
      << clash.err;
  EXPECT_EQ(clash.err.find("5003"), std::string::npos) << clash.err;
}

}  // namespace
}  // namespace stepledger

// examples/data/laptops_to_price.csv through `stepledger predict`, with the audit of the demo's
// stepwise BIC plan: each row built to trip a flag trips exactly that flag, ordinary rows trip
// none, and the rows keep their input order and ids.
//
// The rows are described in examples/laptop_listings.h (MakeLaptopsToPrice). The claim that
// TP-006 is a hidden extrapolation (every column in range, leverage above the largest fitted
// one) is checked against an outside computation: numpy's QR (Debian python3-numpy) on the
// same rows and terms, tests/examples/to_price_leverage.py.

#include <gtest/gtest.h>

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/csv_text.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::RunStepledger;

const std::vector<std::string> kKnownFlags = {"missing", "unknown-level", "invalid-value",
                                              "outside-range", "hidden-extrapolation"};

// Expected flags per row, in input order (examples/laptop_listings.h, MakeLaptopsToPrice).
const std::vector<std::pair<std::string, std::set<std::string>>> kExpected = {
    {"TP-001", {}},
    {"TP-002", {}},
    {"TP-003", {}},  // its empty seller_note_length is not a column of the model
    {"TP-004", {}},
    {"TP-005", {"outside-range"}},
    {"TP-006", {"hidden-extrapolation"}},
    {"TP-007", {"unknown-level"}},
    {"TP-008", {"missing"}},
    {"TP-009", {"invalid-value"}},
};

std::string ReadBytes(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream bytes;
  bytes << in.rdbuf();
  return bytes.str();
}

// The known flag names a flags cell holds, whatever separates them.
std::set<std::string> FlagsIn(const std::string& cell) {
  std::set<std::string> flags;
  std::string word;
  for (char c : cell + " ") {
    if (std::islower(static_cast<unsigned char>(c)) || c == '-') {
      word += c;
    } else {
      if (std::find(kKnownFlags.begin(), kKnownFlags.end(), word) != kKnownFlags.end()) {
        flags.insert(word);
      }
      word.clear();
    }
  }
  return flags;
}

class LaptopsToPrice : public ::testing::Test {
 protected:
  void SetUp() override {
    const auto select = RunStepledger(
        {"select", (testing::SourceDir() / "examples/data/laptops.csv").string(), "--plan",
         (testing::SourceDir() / "examples/plans/stepwise_bic.json").string(), "--out",
         dir_.path().string(), "--quiet"});
    ASSERT_EQ(select.status, 0) << select.err;
    audit_ = dir_.path() / "audit.json";
  }
  testing::TempDir dir_;
  fs::path audit_;
  fs::path rows_ = testing::SourceDir() / "examples/data/laptops_to_price.csv";
};

TEST_F(LaptopsToPrice, EachRowTripsTheFlagItWasBuiltFor) {
  const fs::path out = dir_.path() / "priced.csv";
  const auto run = RunStepledger({"predict", audit_.string(), rows_.string(), "--id", "listing_id",
                                  "--out", out.string()});
  ASSERT_EQ(run.status, 0) << run.out << run.err;
  const auto records = testing::ParseCsvRecords(ReadBytes(out));
  ASSERT_FALSE(records.empty());
  const std::vector<std::string>& header = records[0];
  // The --id column's text is under "id" (predict --help), or under its own name.
  auto id_column = std::find(header.begin(), header.end(), "id") - header.begin();
  if (static_cast<std::size_t>(id_column) == header.size()) {
    id_column = std::find(header.begin(), header.end(), "listing_id") - header.begin();
  }
  const auto flags_column = std::find(header.begin(), header.end(), "flags") - header.begin();
  ASSERT_LT(static_cast<std::size_t>(id_column), header.size()) << "no id column";
  ASSERT_LT(static_cast<std::size_t>(flags_column), header.size()) << "no flags column";
  ASSERT_EQ(records.size(), kExpected.size() + 1) << "one output row per input row";
  for (std::size_t row = 0; row < kExpected.size(); ++row) {
    const std::vector<std::string>& record = records[row + 1];
    ASSERT_GT(record.size(), static_cast<std::size_t>(std::max(id_column, flags_column)));
    EXPECT_EQ(record[id_column], kExpected[row].first) << "input order and ids are kept";
    EXPECT_EQ(FlagsIn(record[flags_column]), kExpected[row].second)
        << record[id_column] << ": flags '" << record[flags_column] << "'";
  }
  // The summary on stderr counts each flag that occurred.
  for (const char* flag : {"outside-range", "hidden-extrapolation", "unknown-level", "missing",
                           "invalid-value"}) {
    EXPECT_NE(run.err.find(flag), std::string::npos) << "stderr summary lacks " << flag << ": " << run.err;
  }
}

TEST_F(LaptopsToPrice, JsonCarriesTheSameFlags) {
  const auto run = RunStepledger(
      {"predict", audit_.string(), rows_.string(), "--id", "listing_id", "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const json result = json::parse(run.out);
  // The rows are the top-level array or its "rows" member.
  const json& rows = result.is_array() ? result : result.at("rows");
  ASSERT_EQ(rows.size(), kExpected.size());
  for (std::size_t row = 0; row < kExpected.size(); ++row) {
    std::set<std::string> flags;
    for (const json& flag : rows[row].at("flags")) {
      flags.insert(flag.is_string() ? flag.get<std::string>() : flag.at("flag").get<std::string>());
    }
    EXPECT_EQ(flags, kExpected[row].second) << rows[row].dump();
  }
}

// Outside reference (Debian python3-numpy): TP-006 lies inside every column's range yet its
// leverage under the fitted model's terms exceeds the largest leverage among the fitted rows;
// the ordinary rows stay below it.
TEST(LaptopsToPriceReference, HiddenExtrapolationRowIsOneByNumpy) {
  if (!testing::PythonHasModules("numpy")) {
    GTEST_SKIP() << "python3-numpy is not available to " << testing::ReferencePython();
  }
  const fs::path script = testing::SourceDir() / "tests/examples/to_price_leverage.py";
  std::string text;
  const std::string command = testing::ReferencePython() + " '" + script.string() + "' '" +
                              (testing::SourceDir() / "examples/data/laptops.csv").string() +
                              "' '" +
                              (testing::SourceDir() / "examples/data/laptops_to_price.csv").string() +
                              "'";
  ASSERT_EQ(testing::RunCommand(command, &text), 0) << command;
  const json result = json::parse(text);
  const double max_leverage = result.at("max_leverage").get<double>();
  EXPECT_EQ(result.at("rows_used").get<int>(), 1923);
  const json& tp006 = result.at("rows").at("TP-006");
  EXPECT_TRUE(tp006.at("in_range").get<bool>());
  EXPECT_GT(tp006.at("leverage").get<double>(), 2 * max_leverage) << "well clear of the bar";
  for (const char* ordinary : {"TP-001", "TP-002", "TP-003", "TP-004"}) {
    const json& row = result.at("rows").at(ordinary);
    EXPECT_TRUE(row.at("in_range").get<bool>()) << ordinary;
    EXPECT_LT(row.at("leverage").get<double>(), 0.75 * max_leverage) << ordinary;
  }
  EXPECT_FALSE(result.at("rows").at("TP-005").at("in_range").get<bool>());
}

}  // namespace
}  // namespace stepledger

// The bundled demo data, rows to price and example plans are reproducible: regenerating them
// gives the committed bytes. (Invented data: the checks are against the repository's own files
// under examples/, and against the drift documented in examples/laptop_listings.h.)

#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "../../examples/laptop_listings.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

std::string ReadBytes(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream bytes;
  bytes << in.rdbuf();
  return bytes.str();
}

// Compares a regenerated text with a committed file, naming the first differing line rather
// than dumping 100 kB.
void ExpectSameAsCommitted(const std::string& regenerated, const std::string& relative_path) {
  const std::filesystem::path committed = testing::SourceDir() / relative_path;
  ASSERT_TRUE(std::filesystem::exists(committed)) << committed;
  const std::string expected = ReadBytes(committed);
  ASSERT_EQ(regenerated.size(), expected.size()) << relative_path;
  if (regenerated != expected) {
    std::size_t line = 1;
    for (std::size_t i = 0; i < expected.size(); ++i) {
      if (regenerated[i] != expected[i]) FAIL() << relative_path << ": first difference on line " << line;
      if (expected[i] == '\n') ++line;
    }
  }
}

std::vector<std::string> SplitFields(const std::string& line) {
  std::vector<std::string> fields;
  std::istringstream stream(line);
  for (std::string field; std::getline(stream, field, ',');) fields.push_back(field);
  if (!line.empty() && line.back() == ',') fields.emplace_back();
  return fields;
}

std::vector<std::string> Lines(const std::string& text) {
  std::vector<std::string> lines;
  std::istringstream stream(text);
  for (std::string line; std::getline(stream, line);) lines.push_back(line);
  return lines;
}

TEST(LaptopData, RegeneratingGivesTheCommittedBytes) {
  ExpectSameAsCommitted(examples::MakeLaptopListings(), "examples/data/laptops.csv");
  // The month argument's default (1) is the bundled month: spelling it out changes nothing.
  EXPECT_EQ(examples::MakeLaptopListings(examples::kLaptopListingsRows,
                                         examples::kLaptopListingsSeed, 1),
            examples::MakeLaptopListings());
}

TEST(LaptopData, SecondMonthRegeneratesTheCommittedBytes) {
  ExpectSameAsCommitted(examples::MakeLaptopListings(examples::kLaptopListingsRows,
                                                     examples::kLaptopListingsMonth2Seed, 2),
                        "examples/data/laptops_month2.csv");
}

TEST(LaptopData, RowsToPriceRegenerateTheCommittedBytes) {
  ExpectSameAsCommitted(examples::MakeLaptopsToPrice(), "examples/data/laptops_to_price.csv");
}

TEST(LaptopData, ExamplePlansRegenerateTheCommittedBytes) {
  for (const char* method : {"forward", "backward", "stepwise", "all-subsets"}) {
    for (const char* criterion : {"adj-r2", "aic", "aicc", "bic", "cp", "partial-f"}) {
      ExpectSameAsCommitted(examples::MakeLaptopPlan(method, criterion),
                            std::string("examples/plans/") + method + "_" + criterion + ".json");
    }
  }
  ExpectSameAsCommitted(examples::MakeLaptopPlan("none", "bic"), "examples/plans/none.json");
}

// The drift documented under SECOND MONTH: with the same seed, month 2 draws the very same
// listings and prices each one lower by exactly 0.8 * age_months (to the printed cent).
TEST(LaptopData, SecondMonthDriftIsTheDocumentedAgeSlope) {
  const std::vector<std::string> month1 = Lines(examples::MakeLaptopListings(300, 11, 1));
  const std::vector<std::string> month2 = Lines(examples::MakeLaptopListings(300, 11, 2));
  ASSERT_EQ(month1.size(), month2.size());
  EXPECT_EQ(month1[0], month2[0]) << "same header";
  double largest_gap = 0;
  for (std::size_t line = 1; line < month1.size(); ++line) {
    const std::vector<std::string> a = SplitFields(month1[line]), b = SplitFields(month2[line]);
    ASSERT_EQ(a.size(), 13u) << month1[line];
    ASSERT_EQ(b.size(), 13u) << month2[line];
    EXPECT_EQ(a[0], "LT-" + std::to_string(100000 + line));
    EXPECT_EQ(b[0], "LT-" + std::to_string(200000 + line));
    for (std::size_t field = 1; field < 12; ++field) EXPECT_EQ(a[field], b[field]) << "line " << line;
    const double age = std::stod(a[1]);
    const double drop = std::stod(a[12]) - std::stod(b[12]);
    // Each price is rounded to the cent, so the difference of two is within 0.01 (+ binary slack).
    EXPECT_NEAR(drop, examples::kAgeDriftPerMonth * age, 0.0100001) << "line " << line;
    largest_gap = std::max(largest_gap, drop);
  }
  EXPECT_GT(largest_gap, 0.8 * 60) << "some listing is at least 60 months old";
}

TEST(LaptopData, RowsToPriceHaveTheDataColumnsButThePrice) {
  const std::vector<std::string> data = Lines(examples::MakeLaptopListings(1, 1));
  const std::vector<std::string> to_price = Lines(examples::MakeLaptopsToPrice());
  ASSERT_GE(to_price.size(), 10u);
  EXPECT_EQ(to_price[0] + ",resale_price", data[0]);
  for (const std::string& line : to_price) EXPECT_EQ(SplitFields(line).size(), 12u) << line;
}

TEST(LaptopData, HasTheDocumentedShape) {
  const std::string text = examples::MakeLaptopListings();
  std::istringstream lines(text);
  std::string header;
  std::getline(lines, header);
  EXPECT_EQ(header,
            "listing_id,age_months,battery_health_pct,memory_gb,storage_gb,screen_in,cpu_score,"
            "grade,warranty_months,listing_weekday,photo_count,seller_note_length,resale_price");
  int rows = 0, missing_battery = 0;
  for (std::string line; std::getline(lines, line);) {
    ++rows;
    if (line.find(",NA,") != std::string::npos) ++missing_battery;
  }
  EXPECT_EQ(rows, examples::kLaptopListingsRows);
  EXPECT_GT(missing_battery, 0) << "the data should have a few missing cells";
}

TEST(LaptopData, SeedChangesTheData) {
  EXPECT_NE(examples::MakeLaptopListings(50, 1), examples::MakeLaptopListings(50, 2));
  EXPECT_EQ(examples::MakeLaptopListings(50, 7), examples::MakeLaptopListings(50, 7));
}

}  // namespace
}  // namespace stepledger

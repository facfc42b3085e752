// The bundled demo data are reproducible: regenerating them gives the committed bytes.
// (Invented data: the check is against the repository's own file, examples/data/laptops.csv.)

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

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

TEST(LaptopData, RegeneratingGivesTheCommittedBytes) {
  const std::filesystem::path committed = testing::SourceDir() / "examples/data/laptops.csv";
  ASSERT_TRUE(std::filesystem::exists(committed)) << committed;
  const std::string expected = ReadBytes(committed);
  const std::string regenerated = examples::MakeLaptopListings();
  ASSERT_EQ(regenerated.size(), expected.size());
  // Name the first differing line rather than dumping 100 kB.
  if (regenerated != expected) {
    std::size_t line = 1;
    for (std::size_t i = 0; i < expected.size(); ++i) {
      if (regenerated[i] != expected[i]) FAIL() << "first difference on line " << line;
      if (expected[i] == '\n') ++line;
    }
  }
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

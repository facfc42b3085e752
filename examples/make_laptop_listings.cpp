// Writes the invented demo data set and its companions (see laptop_listings.h for the true
// model, the second month's drift and the rows to price).
//
//   make_laptop_listings OUT.csv [ROWS [SEED [MONTH]]]   listings (month 1: the true model)
//   make_laptop_listings --month2 OUT.csv                 examples/data/laptops_month2.csv
//   make_laptop_listings --to-price OUT.csv               examples/data/laptops_to_price.csv
//   make_laptop_listings --plans DIR                      examples/plans/METHOD_CRITERION.json
//
// With the defaults the first form reproduces examples/data/laptops.csv byte for byte, and the
// others reproduce their bundled files (tests/examples/laptop_data_test.cpp checks all of them).

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <string>
#include <string_view>

#include "laptop_listings.h"

namespace {

namespace examples = stepledger::examples;

// The methods and criteria the example plans cover.
constexpr const char* kMethods[] = {"forward", "backward", "stepwise", "all-subsets"};
constexpr const char* kCriteria[] = {"adj-r2", "aic", "aicc", "bic", "cp", "partial-f", "cv"};

bool WriteText(const std::filesystem::path& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
  out.close();
  if (!out) {
    std::cerr << "make_laptop_listings: cannot write " << path.string() << "\n";
    return false;
  }
  return true;
}

int Usage() {
  std::cerr << "usage: make_laptop_listings OUT.csv [ROWS [SEED [MONTH]]]\n"
               "       make_laptop_listings --month2 OUT.csv\n"
               "       make_laptop_listings --to-price OUT.csv\n"
               "       make_laptop_listings --plans DIR\n";
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) return Usage();
  const std::string_view first = argv[1];
  if (first == "--month2" || first == "--to-price" || first == "--plans") {
    if (argc != 3) return Usage();
    if (first == "--month2") {
      return WriteText(argv[2], examples::MakeLaptopListings(examples::kLaptopListingsRows,
                                                             examples::kLaptopListingsMonth2Seed, 2))
                 ? 0 : 3;
    }
    if (first == "--to-price") return WriteText(argv[2], examples::MakeLaptopsToPrice()) ? 0 : 3;
    const std::filesystem::path folder = argv[2];
    for (const char* method : kMethods) {
      for (const char* criterion : kCriteria) {
        const std::string name = std::string(method) + "_" + criterion + ".json";
        if (!WriteText(folder / name, examples::MakeLaptopPlan(method, criterion))) return 3;
      }
    }
    // No search: every term is fitted, so the criterion only labels the result.
    return WriteText(folder / "none.json", examples::MakeLaptopPlan("none", "bic")) ? 0 : 3;
  }
  if (argc > 5) return Usage();
  const int rows = argc > 2 ? std::atoi(argv[2]) : examples::kLaptopListingsRows;
  const std::uint64_t seed =
      argc > 3 ? std::strtoull(argv[3], nullptr, 10) : examples::kLaptopListingsSeed;
  const int month = argc > 4 ? std::atoi(argv[4]) : 1;
  if (rows < 1 || month < 1) {
    std::cerr << "make_laptop_listings: ROWS and MONTH must be positive integers\n";
    return 2;
  }
  return WriteText(argv[1], examples::MakeLaptopListings(rows, seed, month)) ? 0 : 3;
}

// Writes the invented demo data set (see laptop_listings.h for its true model).
//
//   make_laptop_listings OUT.csv [ROWS [SEED]]
//
// With the defaults it reproduces examples/data/laptops.csv byte for byte.

#include <cstdlib>
#include <fstream>
#include <iostream>
#include <string>

#include "laptop_listings.h"

int main(int argc, char** argv) {
  if (argc < 2 || argc > 4) {
    std::cerr << "usage: make_laptop_listings OUT.csv [ROWS [SEED]]\n";
    return 2;
  }
  const int rows = argc > 2 ? std::atoi(argv[2]) : stepledger::examples::kLaptopListingsRows;
  const std::uint64_t seed =
      argc > 3 ? std::strtoull(argv[3], nullptr, 10) : stepledger::examples::kLaptopListingsSeed;
  if (rows < 1) {
    std::cerr << "make_laptop_listings: ROWS must be a positive integer\n";
    return 2;
  }
  std::ofstream out(argv[1], std::ios::binary);
  out << stepledger::examples::MakeLaptopListings(rows, seed);
  out.close();
  if (!out) {
    std::cerr << "make_laptop_listings: cannot write " << argv[1] << "\n";
    return 3;
  }
  return 0;
}

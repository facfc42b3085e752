#pragma once
// The numeric CSV the pass and validation benchmarks generate: y, x1..x(columns-1), each x_j a
// sum of three uniforms shifted by j, y = sum over the first `active` columns of slope·j·x_j
// plus uniform noise of the given width; 6 significant digits. The same seed gives the same
// file on every standard library (std::mt19937_64's output is fixed by the standard).

#include <charconv>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include "stepledger/engine/design.h"

namespace stepledger::bench {

struct GeneratedCsv {
  int columns = 20;          ///< y and x1..x(columns-1)
  int active = 19;           ///< y depends on x1..x(active)
  double slope = 0.1;        ///< y's coefficient of x_j is slope·j
  double noise_width = 1.0;  ///< y's noise is uniform on [-width/2, width/2)
  std::uint64_t seed = 20261201;
};

inline void WriteGeneratedCsv(const std::filesystem::path& path, std::uint64_t rows, const GeneratedCsv& shape) {
  std::ofstream out(path, std::ios::binary);
  out << "y";
  for (int j = 1; j < shape.columns; ++j) out << ",x" << j;
  out << "\n";
  std::mt19937_64 engine(shape.seed);
  auto uniform = [&engine] { return static_cast<double>(engine() >> 11) * 0x1.0p-53; };
  std::string line;
  char number[32];
  std::vector<double> x(static_cast<std::size_t>(shape.columns));
  auto append = [&](double value) {
    const auto result = std::to_chars(number, number + sizeof number, value, std::chars_format::general, 6);
    line.append(number, result.ptr);
  };
  for (std::uint64_t row = 0; row < rows; ++row) {
    double y = 0;
    for (int j = 1; j < shape.columns; ++j) {
      x[j] = (uniform() + uniform() + uniform() - 1.5) * 2.0 + j;
      if (j <= shape.active) y += shape.slope * j * x[j];
    }
    y += shape.noise_width * (uniform() - 0.5);
    line.clear();
    append(y);
    for (int j = 1; j < shape.columns; ++j) {
      line += ',';
      append(x[j]);
    }
    line += '\n';
    out << line;
  }
}

/// The plan's design of that file: response y, one numeric term per column x1..x(columns-1),
/// named as the column.
inline DesignSpec GeneratedCsvSpec(const GeneratedCsv& shape) {
  DesignSpec spec;
  spec.response = "y";
  for (int j = 1; j < shape.columns; ++j) {
    TermSpec term;
    term.name = "x" + std::to_string(j);
    term.column = term.name;
    term.key_path = "terms[" + std::to_string(j - 1) + "]";
    spec.terms.push_back(term);
  }
  return spec;
}

}  // namespace stepledger::bench

#pragma once
// Random numbers for invented test data, the same on every standard library: uniforms and
// normals straight from std::mt19937_64 (whose output the C++ standard fixes), because the
// std:: distributions' algorithms differ between libraries.

#include <cmath>
#include <cstdint>
#include <numbers>
#include <random>

namespace stepledger::testing {

class TestRandom {
 public:
  explicit TestRandom(std::uint64_t seed) : engine_(seed) {}
  /// Uniform in [low, high) from the top 53 bits.
  double Uniform(double low, double high) {
    return low + (high - low) * static_cast<double>(engine_() >> 11) * 0x1.0p-53;
  }
  /// Standard normal by Box-Muller (the cosine branch only).
  double Normal() {
    const double u1 = 1.0 - Uniform(0, 1), u2 = Uniform(0, 1);
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }

 private:
  std::mt19937_64 engine_;
};

}  // namespace stepledger::testing

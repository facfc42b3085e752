#include "stepledger/engine/resampling.h"

#include <cmath>

#include <boost/math/distributions/poisson.hpp>

namespace stepledger {

bool IsHeldOut(const HoldoutSettings& holdout, std::uint64_t record) {
  // hash / 2^64 < fraction  <=>  hash < fraction * 2^64. Both sides are exact in long double on
  // x86-64 (a 64-bit significand holds any 64-bit integer; scaling by 2^64 is exact), and where
  // long double is double the product is still exact and the hash rounds to the nearest double,
  // which can only move the decision for hashes within 2^11 of the threshold.
  const long double threshold = std::ldexp(static_cast<long double>(holdout.fraction), 64);
  return static_cast<long double>(RecordHash(holdout.seed, record)) < threshold;
}

const std::array<double, 24>& PoissonDraws::CumulativeProbabilities() {
  static const std::array<double, 24> cdf = [] {
    std::array<double, 24> values{};
    const boost::math::poisson_distribution<double> poisson(1.0);
    for (std::size_t c = 0; c < values.size(); ++c) values[c] = boost::math::cdf(poisson, static_cast<double>(c));
    return values;
  }();
  return cdf;
}

unsigned PoissonDraws::CountOf(std::uint64_t seed, std::uint64_t record, std::size_t replicate) {
  return CountOfHash(RecordHash(seed, record), replicate);
}

unsigned PoissonDraws::CountOfHash(std::uint64_t record_hash, std::size_t replicate) {
  const std::uint64_t hash = SplitMix64(record_hash + (static_cast<std::uint64_t>(replicate) + 1) * kGoldenGamma);
  const double u = static_cast<double>(hash >> 11) * 0x1p-53;
  const std::array<double, 24>& cdf = CumulativeProbabilities();
  unsigned count = 0;
  // P(X <= 17) rounds to 1 in double: the loop ends there at the latest.
  while (count + 1 < cdf.size() && !(u < cdf[count])) ++count;
  return count;
}

}  // namespace stepledger

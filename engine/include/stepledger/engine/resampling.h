#pragma once
// Which rows go where: the cross-validation fold of a data record, whether it is held out, and
// its Poisson bootstrap count in each replicate. Every draw is a function of the plan's seed and
// the record's index alone (0-based among all data records of the file, used or not, in file
// order), never of chunking, threads or processes, so that any layout agrees and an outside tool
// can recompute every assignment from the formulas below (README, "Validation").
//
// The mixing function is SplitMix64's finaliser (Steele, Lea and Flood, "Fast splittable
// pseudorandom number generators", OOPSLA 2014), all arithmetic modulo 2^64:
//   RecordHash(seed, i) = SplitMix64(seed + (i + 1) * 0x9E3779B97F4A7C15)
//   fold(i)             = RecordHash(seed, i) mod k
//   held out            = RecordHash(seed, i) / 2^64 < fraction  (compared exactly)
//   bootstrap count     = the Poisson(1) quantile of u = (h >> 11) * 2^-53, with
//                         h = SplitMix64(RecordHash(seed, i) + (r + 1) * 0x9E3779B97F4A7C15) for
//                         replicate r (0-based): the least c with u < P(X <= c), P computed in
//                         double (Boost.Math's Poisson CDF)
// The Poisson bootstrap: Hanley and MacGibbon, "Creating non-parametric bootstrap samples using
// Poisson frequencies", Computer Methods and Programs in Biomedicine 2006.

#include <array>
#include <cstddef>
#include <cstdint>

namespace stepledger {

inline constexpr std::uint64_t kGoldenGamma = 0x9E3779B97F4A7C15ull;

/// SplitMix64's finaliser of z.
constexpr std::uint64_t SplitMix64(std::uint64_t z) {
  z ^= z >> 30;
  z *= 0xBF58476D1CE4E5B9ull;
  z ^= z >> 27;
  z *= 0x94D049BB133111EBull;
  z ^= z >> 31;
  return z;
}

/// SplitMix64(seed + (record + 1) * kGoldenGamma), arithmetic modulo 2^64.
constexpr std::uint64_t RecordHash(std::uint64_t seed, std::uint64_t record) {
  return SplitMix64(seed + (record + 1) * kGoldenGamma);
}

/// The cross-validation fold (0-based) of a data record: RecordHash(seed, record) mod folds.
constexpr std::size_t FoldOfRecord(std::uint64_t seed, std::uint64_t record, std::size_t folds) {
  return static_cast<std::size_t>(RecordHash(seed, record) % folds);
}

/// Cross-validation settings of a pass: k folds (2..kMaxFolds) drawn with seed.
struct FoldSettings {
  std::size_t k = 10;
  std::uint64_t seed = 1;
  bool operator==(const FoldSettings&) const = default;
};
inline constexpr std::size_t kMinFolds = 2;
inline constexpr std::size_t kMaxFolds = 100;

/// Holdout settings: a record is held out when RecordHash(seed, record) / 2^64 < fraction.
struct HoldoutSettings {
  double fraction = 0.2;  ///< in (0, 1)
  std::uint64_t seed = 7;
  bool operator==(const HoldoutSettings&) const = default;
};

/// Whether a record is held out (the comparison is exact: the hash and fraction * 2^64 are
/// compared as real numbers).
bool IsHeldOut(const HoldoutSettings& holdout, std::uint64_t record);

/// Poisson bootstrap settings.
struct BootstrapSettings {
  std::size_t replicates = 200;  ///< 1..kMaxReplicates
  std::uint64_t seed = 11;
  bool operator==(const BootstrapSettings&) const = default;
};
inline constexpr std::size_t kMaxReplicates = 100000;

/// The Poisson(1) counts of one record in replicates [0, count): draws[r] for replicate r.
/// Counts above 255 cannot occur in double (P(X > 20) < 2^-53, below the resolution of u).
class PoissonDraws {
 public:
  /// The record's count in replicate r (0-based).
  static unsigned CountOf(std::uint64_t seed, std::uint64_t record, std::size_t replicate);
  /// The same from the record's hash RecordHash(seed, record), computed once per row by passes
  /// that draw many replicates.
  static unsigned CountOfHash(std::uint64_t record_hash, std::size_t replicate);
  /// The CDF thresholds P(X <= c) for c = 0.. (Boost.Math), for tests and outside checks.
  static const std::array<double, 24>& CumulativeProbabilities();
};

}  // namespace stepledger

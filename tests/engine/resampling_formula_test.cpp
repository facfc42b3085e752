// The worked example of README "Validation" against the draws of engine/resampling.h, so that
// the formulas an outside tool is told to recompute stay those the tool uses.

#include "stepledger/engine/resampling.h"

#include <array>
#include <cstdint>

#include <gtest/gtest.h>

namespace stepledger {
namespace {

// Expected values: README "Validation", computed independently with Python's unbounded integers
// (the formula written out, every product reduced modulo 2^64).
TEST(ResamplingFormula, TheReadmeExampleOfFolds) {
  EXPECT_EQ(RecordHash(1, 0), 0x910A2DEC89025CC1ull);
  const std::array<std::size_t, 10> expected = {5, 9, 0, 5, 1, 8, 5, 3, 0, 0};
  for (std::uint64_t record = 0; record < expected.size(); ++record) {
    EXPECT_EQ(FoldOfRecord(1, record, 10), expected[record]) << "record " << record;
  }
}

TEST(ResamplingFormula, TheReadmeExampleOfTheHoldout) {
  // fraction 0.2, seed 7: held out when RecordHash / 2^64 < 0.2. The double 0.2 is
  // 3602879701896397 / 2^54, so 0.2 * 2^64 = 3602879701896397 * 2^10 is an integer and the
  // comparison below is exact.
  const std::array<bool, 10> expected = {false, true, false, false, false, false, false, false, true, false};
  constexpr std::uint64_t kLimit = 3602879701896397ull << 10;  // 0.2 * 2^64
  for (std::uint64_t record = 0; record < expected.size(); ++record) {
    const bool held_out = RecordHash(7, record) < kLimit;
    EXPECT_EQ(held_out, expected[record]) << "record " << record;
  }
}

TEST(ResamplingFormula, SplitMix64IsTheStandardFinaliser) {
  // SplitMix64's first output from state 0 (Steele, Lea and Flood 2014; the reference generator
  // adds the golden gamma before finalising): 0xE220A8397B1DCDAF (from memory, and recomputed
  // in Python as above).
  EXPECT_EQ(SplitMix64(0x9E3779B97F4A7C15ull), 0xE220A8397B1DCDAFull);
  EXPECT_EQ(RecordHash(0, 0), 0xE220A8397B1DCDAFull);
}

}  // namespace
}  // namespace stepledger

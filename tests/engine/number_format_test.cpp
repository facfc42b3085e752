// The number policy for people (engine/number_format.h). Expected texts are the policy itself
// (common practice: APA style for statistics and p-values, thousands separators for quantities).
#include "stepledger/engine/number_format.h"

#include <cmath>
#include <limits>

#include <gtest/gtest.h>

namespace stepledger {
namespace {

TEST(NumberFormat, QuantitiesUseFixedPointWithSeparators) {
  EXPECT_EQ(FormatQuantity(1234567.8), "1,234,568");
  EXPECT_EQ(FormatQuantity(12345.678), "12,346");  // never fewer digits than the integer part
  EXPECT_EQ(FormatQuantity(-5.99123), "-5.991");
  EXPECT_EQ(FormatQuantity(0.0123456), "0.01235");
  EXPECT_EQ(FormatQuantity(9.99996), "10.00");
  EXPECT_EQ(FormatQuantity(999.96), "1,000");
  EXPECT_EQ(FormatQuantity(0), "0");
  EXPECT_EQ(FormatQuantity(-1234.5, 6), "-1,234.50");
  EXPECT_EQ(FormatQuantity(40), "40");
  EXPECT_EQ(FormatQuantity(1923), "1,923");
}

TEST(NumberFormat, ExtremeQuantitiesFallBackToScientific) {
  EXPECT_EQ(FormatQuantity(1.234e-7), "1.234e-07");
  EXPECT_EQ(FormatQuantity(2.5e18), "2.500e+18");
  EXPECT_EQ(FormatQuantity(0.00001234), "0.00001234");
}

TEST(NumberFormat, UndefinedIsNotANumber) {
  EXPECT_EQ(FormatQuantity(std::nullopt), "n/a");
  EXPECT_EQ(FormatQuantity(std::numeric_limits<double>::infinity()), "n/a");
  EXPECT_EQ(FormatPValue(std::nullopt), "n/a");
  EXPECT_EQ(FormatStatistic(std::nan("")), "n/a");
}

TEST(NumberFormat, PValuesHaveOneFloor) {
  EXPECT_EQ(FormatPValue(0.0321), "0.0321");
  EXPECT_EQ(FormatPValue(0.5), "0.5000");
  EXPECT_EQ(FormatPValue(0.0001), "0.0001");
  EXPECT_EQ(FormatPValue(0.00009999), "< 0.0001");
  EXPECT_EQ(FormatPValue(4.9e-324), "< 0.0001");  // a subnormal: never a bare 0
  EXPECT_EQ(FormatPValue(0), "< 0.0001");
  EXPECT_EQ(PValueClause(0.0321), "p = 0.0321");
  EXPECT_EQ(PValueClause(1e-30), "p < 0.0001");
}

TEST(NumberFormat, StatisticsCountsAndTheFTest) {
  EXPECT_EQ(FormatStatistic(4460.6789), "4,460.68");
  EXPECT_EQ(FormatStatistic(-0.001), "0.00");
  EXPECT_EQ(FormatCount(1923), "1,923");
  EXPECT_EQ(FormatCount(-1234567), "-1,234,567");
  EXPECT_EQ(FormatCount(12), "12");
  EXPECT_EQ(FormatPercent(0.125), "12.5%");
  EXPECT_EQ(FormatFTest(4460.6789, 12, 1910, 1e-200), "F(12, 1910) = 4,460.68, p < 0.0001");
  EXPECT_EQ(FormatFTest(std::nullopt, 1, 2, std::nullopt), "F n/a");
}

}  // namespace
}  // namespace stepledger

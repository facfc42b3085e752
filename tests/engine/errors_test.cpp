// Tests of the message helpers of errors.h. Expected texts are written by hand (common practice).

#include "stepledger/engine/errors.h"

#include <gtest/gtest.h>

#include <string>

namespace stepledger {
namespace {

TEST(FormatLocationTest, FileLineColumn) {
  EXPECT_EQ(FormatLocation("data/laptops.csv", 12, 7), "data/laptops.csv:12:7");
  EXPECT_EQ(FormatLocation("x.csv", 1, 1), "x.csv:1:1");
  EXPECT_EQ(FormatLocation("big.csv", 18446744073709551615ull, 3), "big.csv:18446744073709551615:3");
}

TEST(QuoteForMessageTest, ShortTextIsUnchangedAndUnquoted) {
  EXPECT_EQ(QuoteForMessage("grade A"), "grade A");
  EXPECT_EQ(QuoteForMessage(""), "");
  EXPECT_EQ(QuoteForMessage(std::string(40, 'x')), std::string(40, 'x'));
}

TEST(QuoteForMessageTest, LongTextIsShortened) {
  EXPECT_EQ(QuoteForMessage(std::string(41, 'x')), std::string(40, 'x') + "...");
  EXPECT_EQ(QuoteForMessage("abcdef", 3), "abc...");
  EXPECT_EQ(QuoteForMessage("abcdef", 0), "...");
}

TEST(QuoteForMessageTest, ControlBytesAreEscapedSoTheMessageStaysOnOneLine) {
  EXPECT_EQ(QuoteForMessage("a\nb\r\tc"), "a\\nb\\r\\tc");
  EXPECT_EQ(QuoteForMessage(std::string("x\0y", 3)), "x\\x00y");
  EXPECT_EQ(QuoteForMessage("\x1b\x7f"), "\\x1B\\x7F");
}

TEST(QuoteForMessageTest, CutNeverSplitsAUtf8Character) {
  // "é" is the two bytes C3 A9; cutting after 2 bytes would leave half of it.
  EXPECT_EQ(QuoteForMessage("aéb", 2), "a...");
  EXPECT_EQ(QuoteForMessage("aéb", 3), "aé...");
  // "€" is three bytes E2 82 AC.
  EXPECT_EQ(QuoteForMessage("€€", 4), "€...");
  EXPECT_EQ(QuoteForMessage("€€", 6), "€€");
}

}  // namespace
}  // namespace stepledger

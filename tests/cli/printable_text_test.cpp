// The escape of text bound for a terminal (printable_text.h): control characters and bytes that
// are not well-formed UTF-8 (RFC 3629; the table of well-formed byte sequences in the Unicode
// standard, chapter 3) become \xHH; well-formed text passes unchanged, however it is split.

#include "stepledger/cli/printable_text.h"

#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "support/cli_run.h"

namespace stepledger {
namespace {

TEST(PrintableTextTest, ControlCharactersAreEscapedButLineFeedAndTabAreKept) {
  EXPECT_EQ(PrintableText("price\tage\n"), "price\tage\n");
  EXPECT_EQ(PrintableText("a\x1b[2Jb"), "a\\x1B[2Jb");
  EXPECT_EQ(PrintableText(std::string("a\0b", 3)), "a\\x00b");
  EXPECT_EQ(PrintableText("a\rb\x7f"), "a\\x0Db\\x7F");
}

TEST(PrintableTextTest, WellFormedUtf8PassesAndMalformedBytesAreEscaped) {
  EXPECT_EQ(PrintableText("Gr\xc3\xb6\xc3\x9f" "e \xe2\x82\xac \xf0\x9f\x92\xbb"), "Gr\xc3\xb6\xc3\x9f" "e \xe2\x82\xac \xf0\x9f\x92\xbb");
  EXPECT_EQ(PrintableText("\xff"), "\\xFF");
  EXPECT_EQ(PrintableText("\xc0\xaf"), "\\xC0\\xAF");          // overlong '/'
  EXPECT_EQ(PrintableText("\xed\xa0\x80"), "\\xED\\xA0\\x80");  // a surrogate, U+D800
  EXPECT_EQ(PrintableText("\xf4\x90\x80\x80"), "\\xF4\\x90\\x80\\x80");  // above U+10FFFF
  EXPECT_EQ(PrintableText("\xe2\x82"), "\\xE2\\x82");           // cut short at the end
  EXPECT_EQ(PrintableText("\xe2\x82x"), "\\xE2\\x82x");
}

TEST(PrintableTextTest, TheStreamGivesTheSameTextWhereverTheWritesAreSplit) {
  const std::string text = "level \xe2\x82\xac\x1b[31m red \xf0\x9f\x92\xbb end \xff\n";
  const std::string expected = PrintableText(text);
  for (std::size_t cut = 0; cut <= text.size(); ++cut) {
    std::ostringstream target;
    {
      PrintableTextStream stream(target);
      stream << text.substr(0, cut);
      stream << text.substr(cut);
    }
    EXPECT_EQ(target.str(), expected) << "cut at " << cut;
  }
}

TEST(PrintableTextTest, MessagesOnStderrAreEscaped) {
  const auto run = testing::RunStepledger({"profile", std::string("no\x1b]0;title\x07such.csv")});
  EXPECT_EQ(run.status, 2);
  EXPECT_EQ(run.err.find('\x1b'), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("no\\x1B]0;title\\x07such.csv"), std::string::npos) << run.err;
}

}  // namespace
}  // namespace stepledger

// UTF-8 validity (engine/utf8.h): the well-formed sequences of RFC 3629 section 4 and each way a
// sequence can be ill-formed (table 3-7 of the Unicode Standard, "well-formed UTF-8 byte
// sequences", from memory; checked against Python's strict UTF-8 decoder below).

#include "stepledger/engine/utf8.h"

#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "support/test_paths.h"

namespace stepledger {
namespace {

TEST(Utf8, WellFormedTextIsValid) {
  for (const std::string text : {"", "plain ASCII", "caf\xC3\xA9", "\xE2\x82\xAC 5", "\xF0\x9F\x92\xBB laptop",
                                 "\xEF\xBB\xBF", "\xED\x9F\xBF", "\xEE\x80\x80", "\xF4\x8F\xBF\xBF"}) {
    EXPECT_FALSE(FirstInvalidUtf8(text).has_value()) << text;
    EXPECT_EQ(Utf8Replaced(text), text);
    EXPECT_EQ(DescribeInvalidUtf8(text), "");
  }
}

TEST(Utf8, EachIllFormedSequenceIsFoundAtItsFirstByte) {
  struct Case {
    std::string text;
    std::size_t at;
  };
  const std::vector<Case> cases = {
      {"caf\xE9", 3},              // Latin-1 e-acute: a lead byte with nothing after it
      {"\xFF", 0},                 // never a UTF-8 byte
      {"ab\x80", 2},               // a continuation byte alone
      {"\xC0\xAF", 0},             // overlong '/'
      {"\xC1\xBF", 0},             // overlong
      {"\xE0\x80\xAF", 0},         // overlong three-byte form
      {"\xED\xA0\x80", 0},         // a surrogate (U+D800)
      {"\xF0\x80\x80\xAF", 0},     // overlong four-byte form
      {"\xF4\x90\x80\x80", 0},     // above U+10FFFF
      {"\xF5\x80\x80\x80", 0},     // lead byte past F4
      {"x\xE2\x82", 1},            // truncated at the end
      {"\xE2\x28\xA1", 0},         // second byte not a continuation
      {"ok \xC3\xA9 then \xE9", 11},
  };
  for (const Case& c : cases) {
    const auto at = FirstInvalidUtf8(c.text);
    ASSERT_TRUE(at.has_value()) << c.at;
    EXPECT_EQ(*at, c.at);
  }
  EXPECT_EQ(DescribeInvalidUtf8("caf\xE9"), "byte 0xE9 at byte 4");
  EXPECT_EQ(Utf8Replaced("caf\xE9!"), "caf\xEF\xBF\xBD!");
  EXPECT_EQ(Utf8Replaced("\xC0\xAF"), "\xEF\xBF\xBD\xEF\xBF\xBD");
}

// Python's strict decoder (Debian python3) agrees on every one- and two-byte string and on
// every lead byte followed by each boundary continuation.
TEST(Utf8, AgreesWithPythonsStrictDecoder) {
  const std::string script =
      "import sys\n"
      "bad = []\n"
      "cands = [bytes([a]) for a in range(256)] + [bytes([a, b]) for a in range(0xC0, 0x100) for b in range(0x70, 0xD0)]\n"
      "cands += [bytes([a, b, 0x80, 0x80]) for a in range(0xE0, 0xF8) for b in (0x7F, 0x80, 0x8F, 0x90, 0x9F, 0xA0, 0xBF, 0xC0)]\n"
      "for c in cands:\n"
      "    try:\n"
      "        c.decode('utf-8'); ok = 1\n"
      "    except UnicodeDecodeError:\n"
      "        ok = 0\n"
      "    sys.stdout.write(c.hex() + ' ' + str(ok) + '\\n')\n";
  testing::TempDir folder;
  const auto path = folder.Write("decode.py", script);
  std::string output;
  const int status = testing::RunCommand(testing::ReferencePython() + " '" + path.string() + "'", &output);
  ASSERT_EQ(status, 0) << "python3 is needed for this reference";
  std::size_t checked = 0;
  std::size_t position = 0;
  while (position < output.size()) {
    const std::size_t end = output.find('\n', position);
    const std::string line = output.substr(position, end - position);
    position = end + 1;
    const std::size_t space = line.find(' ');
    std::string bytes;
    for (std::size_t i = 0; i < space; i += 2) bytes += static_cast<char>(std::stoi(line.substr(i, 2), nullptr, 16));
    const bool python_valid = line.substr(space + 1) == "1";
    EXPECT_EQ(!FirstInvalidUtf8(bytes).has_value(), python_valid) << line.substr(0, space);
    ++checked;
  }
  EXPECT_GT(checked, 6000u);
}

}  // namespace
}  // namespace stepledger

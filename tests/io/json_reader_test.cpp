// The one strict JSON reader (io/json_reader.h). Expected messages are the reader's contract.
#include "stepledger/io/json_reader.h"

#include <chrono>
#include <cstdint>
#include <limits>
#include <string>

#include <gtest/gtest.h>

#include "stepledger/io/plan_file.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

std::string MessageOf(std::string_view text, const JsonReadOptions& options = {}) {
  try {
    ParseStrictJson(text, "doc.json", options);
  } catch (const JsonReadError& error) {
    return error.what();
  }
  return "";
}

TEST(StrictJson, MalformedJsonNamesLineAndColumn) {
  EXPECT_EQ(MessageOf("{\n  \"a\": 1,\n}").rfind("doc.json:3:1: malformed JSON", 0), 0u)
      << MessageOf("{\n  \"a\": 1,\n}");
}

// Text that is not UTF-8 inside a string is malformed JSON; the message shows the bad byte as
// \xFF (nlohmann quotes what it last read raw), so that it prints as text.
TEST(StrictJson, TextThatIsNotUtf8IsNamedWithPrintableBytes) {
  const std::string message = MessageOf("{\"level\": \"caf\xE9\"}");
  // nlohmann stops at the byte that ends the bad sequence (here the closing quote).
  EXPECT_EQ(message.rfind("doc.json:1:16: malformed JSON: ", 0), 0u) << message;
  EXPECT_NE(message.find("\\xE9"), std::string::npos) << message;
  EXPECT_EQ(message.find('\xE9'), std::string::npos) << "the raw byte is not echoed";
  EXPECT_EQ(MessageOf("{\"level\": \"caf\xC3\xA9\"}"), "") << "control: UTF-8 text is read";
}

TEST(StrictJson, ARepeatedKeyNamesItsPathAndWhereItStarts) {
  try {
    ParseStrictJson("{\"terms\": [{\"name\": \"a\"},\n  {\"name\": \"b\", \"name\": \"c\"}]}", "doc.json");
    FAIL() << "expected JsonReadError";
  } catch (const JsonReadError& error) {
    EXPECT_EQ(error.key_path(), "terms[1].name");
    // The second "name" starts at line 2, column 17 (its opening quote).
    EXPECT_EQ(std::string(error.what()),
              "doc.json:2:17: key 'terms[1].name': duplicate key; each key may appear once in an object");
    EXPECT_EQ(error.detail(), "duplicate key; each key may appear once in an object (doc.json:2:17)");
  }
  // A key with escaped quotes in it is located at its own opening quote.
  EXPECT_EQ(MessageOf(R"({"a\"b": 1, "a\"b": 2})").rfind("doc.json:1:13: key 'a\"b'", 0), 0u)
      << MessageOf(R"({"a\"b": 1, "a\"b": 2})");
  // The same key in two different objects is no duplicate.
  EXPECT_EQ(MessageOf(R"({"a": {"x": 1}, "b": {"x": 1}})"), "");
}

// nlohmann reports a number beyond a double as out_of_range.406, without a place; the reader
// names the file, line and column where the number starts (was: exit 3, "internal error").
TEST(StrictJson, ANumberBeyondADoubleNamesWhereItStarts) {
  EXPECT_EQ(MessageOf("{\n  \"entry_p\": 1e400\n}"),
            "doc.json:2:14: number 1e400 is beyond the range of a double (about 1.8e308)");
  EXPECT_EQ(MessageOf("[1, -2.5E+999]"), "doc.json:1:5: number -2.5E+999 is beyond the range of a double (about 1.8e308)");
  EXPECT_EQ(MessageOf("1e400"), "doc.json:1:1: number 1e400 is beyond the range of a double (about 1.8e308)");
  // An integer of 400 digits is one too.
  EXPECT_NE(MessageOf("[" + std::string(400, '9') + "]").find("doc.json:1:2: number 9999"), std::string::npos);
  // Tiny numbers underflow to zero or a subnormal, which a double holds: accepted.
  EXPECT_EQ(MessageOf("[1e-400]"), "");
}

// Seeds are unsigned 64-bit integers: every integer up to 2^64 - 1 arrives as an integer, exactly
// (a double would round 2^53 + 1 and 2^64 - 1); 2^64 and beyond arrive as a double, which the plan
// reader refuses as "not an integer".
TEST(StrictJson, IntegersUpToTwoToThe64MinusOneAreExact) {
  const nlohmann::json values =
      ParseStrictJson("[18446744073709551615, 9007199254740993, -9223372036854775808, 18446744073709551616]", "doc.json");
  EXPECT_TRUE(values[0].is_number_unsigned());
  EXPECT_EQ(values[0].get<std::uint64_t>(), 18446744073709551615ull);
  EXPECT_EQ(values[1].get<std::uint64_t>(), 9007199254740993ull);
  EXPECT_TRUE(values[2].is_number_integer());
  EXPECT_EQ(values[2].get<std::int64_t>(), std::numeric_limits<std::int64_t>::min());
  EXPECT_TRUE(values[3].is_number_float());
  EXPECT_EQ(values[3].get<double>(), 18446744073709551616.0);
}

// 100,000 levels crashed the old reader's message code; the limit refuses them while parsing.
TEST(StrictJson, DeepNestingIsRefusedWithAClearMessage) {
  const std::string deep = std::string(100000, '[') + std::string(100000, ']');
  const std::string message = MessageOf(deep);
  // The 65th '[' is at column 65; the path is shortened to stay readable.
  EXPECT_EQ(message.rfind("doc.json:1:65: nested deeper than 64 levels of arrays and objects (at [0][0]", 0), 0u)
      << message;
  EXPECT_LT(message.size(), 200u) << message;
  const std::string deep_object = "{\"a\":\n" + std::string(70, '[') + std::string(70, ']') + "}";
  EXPECT_NE(MessageOf(deep_object).find("doc.json:2:64: nested deeper"), std::string::npos) << MessageOf(deep_object);
  EXPECT_NE(MessageOf(deep_object).find("(at a[0]"), std::string::npos) << MessageOf(deep_object);
  // The index named is the element's own: the third element of the outer array.
  const std::string third = "[1, 2, " + std::string(70, '[') + std::string(70, ']') + "]";
  EXPECT_NE(MessageOf(third).find("(at [2][0][0]"), std::string::npos) << MessageOf(third);
  // Keys of an object inside an array element name that element.
  EXPECT_NE(MessageOf(R"([{}, {"x": 1, "x": 2}])").find("key '[1].x'"), std::string::npos)
      << MessageOf(R"([{}, {"x": 1, "x": 2}])");
  // Exactly at the limit is accepted.
  EXPECT_EQ(MessageOf(std::string(64, '[') + std::string(64, ']')), "");
  EXPECT_NE(MessageOf(std::string(65, '[') + std::string(65, ']')), "");
  JsonReadOptions shallow;
  shallow.max_depth = 2;
  EXPECT_NE(MessageOf("[[[]]]", shallow), "");
}

TEST(StrictJson, APlanNestedDeeplyIsAPlanError) {
  const std::string deep = "{\"response\": " + std::string(100000, '[') + std::string(100000, ']') + "}";
  try {
    ParsePlanText(deep, "plan.json");
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_NE(std::string(error.what()).find("plan.json:1:77: nested deeper"), std::string::npos) << error.what();
  }
  // A duplicate key in a plan is a plan error at its key, saying where it is.
  try {
    ParsePlanText("{\"response\": \"y\",\n \"response\": \"z\", \"terms\": \"all\"}", "plan.json");
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "response");
    EXPECT_EQ(std::string(error.what()),
              "plan key 'response': duplicate key; each key may appear once in an object (plan.json:2:2)");
  }
  // 1e400 in a plan: the file, line and column.
  try {
    ParsePlanText("{\"response\": \"y\", \"terms\": \"all\", \"entry_p\": 1e400}", "plan.json");
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(std::string(error.what()), "plan: plan.json:1:46: number 1e400 is beyond the range of a double (about 1.8e308)");
  }
}

// The parser builds the document from SAX events; nlohmann's callback parser scanned the whole
// enclosing container after every object, so 400,000 objects in an array took 100 s (n^2).
TEST(StrictJson, ManySmallObjectsInAnArrayReadInLinearTime) {
  std::string text = "{\"rows\": [";
  for (int i = 0; i < 400000; ++i) text += (i > 0 ? ",{\"a\":" : "{\"a\":") + std::to_string(i) + ",\"b\":[1,2]}";
  text += "]}";
  const auto started = std::chrono::steady_clock::now();
  const nlohmann::json document = ParseStrictJson(text, "doc.json");
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  ASSERT_EQ(document["rows"].size(), 400000u);
  EXPECT_EQ(document["rows"][399999]["a"], 399999);
  EXPECT_EQ(document["rows"][7]["b"], nlohmann::json::array({1, 2}));
  // Linear takes well under a second here; quadratic took 100 s (common practice: a bound far
  // from both, so that a loaded machine does not fail it).
  EXPECT_LT(seconds, 20.0);
  // The same document as nlohmann's own parser gives.
  EXPECT_EQ(document, nlohmann::json::parse(text));
}

TEST(StrictJson, ReadWholeFileNamesWhatItCannotOpen) {
  testing::TempDir folder;
  try {
    ReadWholeFile(folder.path() / "absent.json", "audit file");
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("cannot open audit file"), std::string::npos) << error.what();
  }
  EXPECT_THROW(ReadWholeFile(folder.path(), "plan file"), InputError);
  EXPECT_EQ(ReadWholeFile(folder.Write("x.json", "{}"), "plan file"), "{}");
}

}  // namespace
}  // namespace stepledger

#include "stepledger/audit/canonical_json.h"

#include <cmath>
#include <cstring>
#include <limits>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

// RFC 8785 (JSON Canonicalization Scheme), section 3.2.2 example; recalled from memory and
// checked by hand against the rules of ECMA-262 Number::toString.
TEST(CanonicalJson, Rfc8785Example) {
  auto input = nlohmann::json::parse(R"({
    "numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],
    "string": "\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/",
    "literals": [null, true, false]
  })");
  EXPECT_EQ(CanonicalJson(input),
            "{\"literals\":[null,true,false],"
            "\"numbers\":[333333333.3333333,1e+30,4.5,0.002,1e-27],"
            "\"string\":\"\xe2\x82\xac$\\u000f\\nA'B\\\"\\\\\\\\\\\"/\"}");
}

// ECMA-262 Number::toString boundaries (common practice: the standard's own cut-offs at
// 1e21 and 1e-6).
TEST(CanonicalJson, NumberFormsAtTheBoundaries) {
  EXPECT_EQ(CanonicalNumber(0.0), "0");
  EXPECT_EQ(CanonicalNumber(-0.0), "0");
  EXPECT_EQ(CanonicalNumber(1.0), "1");
  EXPECT_EQ(CanonicalNumber(-1.5), "-1.5");
  EXPECT_EQ(CanonicalNumber(1e20), "100000000000000000000");
  EXPECT_EQ(CanonicalNumber(1e21), "1e+21");
  EXPECT_EQ(CanonicalNumber(0.000001), "0.000001");
  EXPECT_EQ(CanonicalNumber(0.0000001), "1e-7");
  EXPECT_EQ(CanonicalNumber(123.456e-10), "1.23456e-8");
  EXPECT_EQ(CanonicalNumber(5e-324), "5e-324");
  EXPECT_EQ(CanonicalNumber(1.7976931348623157e308), "1.7976931348623157e+308");
  EXPECT_EQ(CanonicalNumber(0.1 + 0.2), "0.30000000000000004");
}

TEST(CanonicalJson, EveryDoubleRoundTrips) {
  std::uint64_t state = 88172645463325252ULL;
  for (int i = 0; i < 20000; ++i) {
    state ^= state << 13;
    state ^= state >> 7;
    state ^= state << 17;
    double value;
    std::memcpy(&value, &state, sizeof value);
    if (!std::isfinite(value)) continue;
    std::string text = CanonicalNumber(value);
    double back = std::strtod(text.c_str(), nullptr);
    ASSERT_EQ(back, value == 0 ? 0.0 : value) << text;
  }
}

TEST(CanonicalJson, KeyOrderAndWhiteSpaceDoNotMatter) {
  auto a = nlohmann::json::parse(R"({"b": [1, 2.0, {"z": null, "a": "x"}], "a": 0.5})");
  auto b = nlohmann::json::parse("{\"a\":0.5,\n \"b\":[1.0,2,{\"a\":\"x\",\"z\":null}]}");
  EXPECT_EQ(CanonicalJson(a), CanonicalJson(b));
  EXPECT_EQ(CanonicalJson(a), R"({"a":0.5,"b":[1,2,{"a":"x","z":null}]})");
}

TEST(CanonicalJson, MembersSortByUtf16CodeUnits) {
  // U+10000 is a surrogate pair (0xD800...) and sorts before U+FFFF in UTF-16, unlike UTF-8.
  nlohmann::json value = {{"\xef\xbf\xbf", 1}, {"\xf0\x90\x80\x80", 2}};
  EXPECT_EQ(CanonicalJson(value), "{\"\xf0\x90\x80\x80\":2,\"\xef\xbf\xbf\":1}");
}

TEST(CanonicalJson, LargeIntegersStayExact) {
  nlohmann::json value = {{"seed", 18446744073709551615ULL}, {"n", -9007199254740993LL}};
  EXPECT_EQ(CanonicalJson(value), R"({"n":-9007199254740993,"seed":18446744073709551615})");
}

TEST(CanonicalJson, NonFiniteNumbersAreRefused) {
  nlohmann::json value = {{"x", std::numeric_limits<double>::quiet_NaN()}};
  EXPECT_THROW(CanonicalJson(value), InputError);
}

// Debian python3 (json module) as an independent serialiser: re-serialising a document with
// other white space and key order leaves the canonical form unchanged.
TEST(CanonicalJson, PythonReserialisationKeepsTheCanonicalForm) {
  if (!testing::PythonHasModules("json")) GTEST_SKIP() << "no python3 at " << testing::ReferencePython();
  nlohmann::json value = {{"route", {{{"term", "age"}, {"rss", 1234.5678901234567}},
                                     {{"term", "grade"}, {"rss", 1e-300}}}},
                          {"n", 2000}, {"label", "d\xc3\xa9j\xc3\xa0 \"vu\""}};
  testing::TempDir folder;
  auto file = folder.Write("in.json", value.dump());
  std::string output;
  ASSERT_EQ(testing::RunCommand("'" + testing::ReferencePython() +
                                    "' -c 'import json,sys; d=json.load(open(sys.argv[1]));"
                                    " print(json.dumps(d, indent=3, sort_keys=False)[::1])' '" +
                                    file.string() + "'",
                                &output),
            0);
  EXPECT_EQ(CanonicalJson(nlohmann::json::parse(output)), CanonicalJson(value));
}

// A value built in memory can nest far deeper than a file may (the reader stops at 64): the
// writer keeps its own stack, so 200,000 levels canonicalise instead of exhausting the call
// stack (the recursive writer crashed here).
TEST(CanonicalJson, DeepNestingBuiltInMemoryDoesNotExhaustTheStack) {
  constexpr std::size_t kDepth = 200000;
  nlohmann::json value = nlohmann::json::object({{"b", 1}, {"a", nullptr}});
  for (std::size_t i = 0; i < kDepth; ++i) {
    nlohmann::json outer = nlohmann::json::array();
    outer.push_back(std::move(value));
    value = std::move(outer);
  }
  const std::string text = CanonicalJson(value);
  EXPECT_EQ(text, std::string(kDepth, '[') + "{\"a\":null,\"b\":1}" + std::string(kDepth, ']'));
  // Objects in arrays in objects keep their order rules at every level.
  EXPECT_EQ(CanonicalJson(nlohmann::json::parse(R"({"z": [{"y": 1, "x": [2, {"w": 3, "v": 4}]}], "a": {}})")),
            R"({"a":{},"z":[{"x":[2,{"v":4,"w":3}],"y":1}]})");
}

}  // namespace
}  // namespace stepledger

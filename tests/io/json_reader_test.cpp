// The one strict JSON reader (io/json_reader.h). Expected messages are the reader's contract.
#include "stepledger/io/json_reader.h"

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

TEST(StrictJson, ARepeatedKeyNamesItsPath) {
  try {
    ParseStrictJson(R"({"terms": [{"name": "a"}, {"name": "b", "name": "c"}]})", "doc.json");
    FAIL() << "expected JsonReadError";
  } catch (const JsonReadError& error) {
    EXPECT_EQ(error.key_path(), "terms[1].name");
    EXPECT_NE(std::string(error.what()).find("duplicate key"), std::string::npos) << error.what();
  }
}

// 100,000 levels crashed the old reader's message code; the limit refuses them while parsing.
TEST(StrictJson, DeepNestingIsRefusedWithAClearMessage) {
  const std::string deep = std::string(100000, '[') + std::string(100000, ']');
  const std::string message = MessageOf(deep);
  EXPECT_NE(message.find("nested deeper than 64 levels"), std::string::npos) << message;
  const std::string deep_object = "{\"a\":" + std::string(70, '[') + std::string(70, ']') + "}";
  EXPECT_NE(MessageOf(deep_object).find("at a[0]"), std::string::npos) << MessageOf(deep_object);
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
    EXPECT_NE(std::string(error.what()).find("nested deeper"), std::string::npos) << error.what();
  }
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

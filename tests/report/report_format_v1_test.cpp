// A report of an audit of format_version 1 (tests/audit/format_v1, written by the build before
// the names changed): it renders in today's names, so a reviewer reading an old audit sees the
// same words as in a new one.
#include <string>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

TEST(ReportOfFormatV1, RendersInTodaysNames) {
  const nlohmann::json document =
      ReadAuditFile(testing::SourceDir() / "tests" / "audit" / "format_v1" / "audit.json");
  ASSERT_EQ(document["format_version"], 1);
  for (const std::string& rendered :
       {RenderTextReport(document, nullptr, {}), RenderHtmlReport(document, nullptr, {})}) {
    EXPECT_NE(rendered.find("age:grade=A"), std::string::npos);
    EXPECT_EQ(rendered.find("grade[A]"), std::string::npos);
    // The rows dropped for a missing cell are named by reason and column, never as raw JSON.
    EXPECT_NE(rendered.find("battery"), std::string::npos);
    EXPECT_EQ(rendered.find("{\"column\""), std::string::npos);
  }
}

}  // namespace
}  // namespace stepledger

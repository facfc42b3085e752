#pragma once
// Checks of the HTML report shared by the report tests: Python's html.parser (Debian's python3,
// STEPLEDGER_REFERENCE_PYTHON) through tests/support/report_html_check.py, and a headless
// chromium screenshot when chromium is installed.

#include <filesystem>
#include <map>
#include <string>
#include <vector>

namespace stepledger::testing {

struct HtmlReportCheck {
  bool ran = false;                    ///< false when the checker could not run (see error)
  std::string error;                   ///< why it did not run
  std::vector<std::string> problems;   ///< unbalanced tags, with their line
  bool doctype = false;                ///< <!DOCTYPE html> present
  std::map<std::string, int> counts;   ///< points ("pt" elements) by their other classes
  /// Per <svg>, in document order: its class attribute and its points by class.
  std::vector<std::pair<std::string, std::map<std::string, int>>> charts;
  /// The <title> text of each ineligible candidate point, in document order ("" when absent).
  std::vector<std::string> ineligible_titles;
  int Count(const std::string& kind) const {
    const auto found = counts.find(kind);
    return found == counts.end() ? 0 : found->second;
  }
};

/// Parses an HTML file with html.parser and counts its chart points.
HtmlReportCheck CheckHtmlReport(const std::filesystem::path& html);

/// Screenshots html with headless chromium (1200x3000) into png and reports whether the image
/// has more than one colour (decoded with python3's zlib). Returns "skip: ..." when chromium is
/// not installed, "" when the screenshot is not blank, else what went wrong.
std::string ScreenshotIsNotBlank(const std::filesystem::path& html, const std::filesystem::path& png);

}  // namespace stepledger::testing

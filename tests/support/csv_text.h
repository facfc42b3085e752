#pragma once
// Reading small CSV texts that the command line wrote (predict's output, the bundled files):
// quoted fields with "" escapes, CRLF or LF, no newlines inside a field.

#include <string>
#include <vector>

namespace stepledger::testing {

/// The fields of one line.
std::vector<std::string> SplitCsvLine(const std::string& line);

/// The records of a text, the header included; empty lines are skipped.
std::vector<std::vector<std::string>> ParseCsvRecords(const std::string& text);

}  // namespace stepledger::testing

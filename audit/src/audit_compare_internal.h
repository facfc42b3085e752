#pragma once
// Internal to the comparison of audits: what the comparison (audit_compare.cpp) and its text
// (audit_compare_report.cpp) share.

#include <string>

namespace stepledger::compare_detail {

/// A threshold as people write it: "0.1", "2" (the shortest text that reads back).
std::string ThresholdText(double value);

}  // namespace stepledger::compare_detail

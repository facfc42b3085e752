// Quoting and key paths for the design's messages, shared by its source files (design_spec.cpp
// checks a plan's design part, design.cpp builds the design from it, design_rows.cpp expands
// rows with it) so all quote names and name keys alike; and the plan order they share.
#pragma once

#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/design.h"

#include "stepledger/engine/errors.h"

namespace stepledger::design_detail {

inline std::string Quote(std::string_view text) { return "'" + QuoteForMessage(text) + "'"; }

// File names are quoted whole: a shortened path does not say which file.
inline std::string QuotePath(const std::filesystem::path& path) {
  return "'" + QuoteForMessage(path.string(), 4096) + "'";
}

inline constexpr const char* kInterceptName = "intercept";

// The key of a term ("terms[3]"), as the plan file's reader set it.
inline std::string TermKey(const TermSpec& term, std::size_t index) {
  return term.key_path.empty() ? "terms[" + std::to_string(index) + "]" : term.key_path;
}

// Key (relative to the term) of the source column of each kind, as the plan file spells it.
inline std::string SourceKeySuffix(TermKind kind) {
  switch (kind) {
    case TermKind::kNumeric: return ".column";
    case TermKind::kPower: return ".power.column";
    case TermKind::kLog: return ".log";
    case TermKind::kCategorical: return ".categorical";
    case TermKind::kProduct: return ".product";
  }
  return "";
}

// Plan order with every product after its parts (design_spec.cpp). ValidateDesignSpec must
// have accepted the terms (no cycle, every part a term).
std::vector<std::size_t> EvaluationOrder(const std::vector<TermSpec>& terms);

}  // namespace stepledger::design_detail

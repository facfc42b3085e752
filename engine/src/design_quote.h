// Quoting for the design's messages, shared by its two source files (design.cpp builds the
// design from a plan, design_rows.cpp expands rows with it) so both quote names alike.
#pragma once

#include <filesystem>
#include <string>
#include <string_view>

#include "stepledger/engine/errors.h"

namespace stepledger::design_detail {

inline std::string Quote(std::string_view text) { return "'" + QuoteForMessage(text) + "'"; }

// File names are quoted whole: a shortened path does not say which file.
inline std::string QuotePath(const std::filesystem::path& path) {
  return "'" + QuoteForMessage(path.string(), 4096) + "'";
}

}  // namespace stepledger::design_detail

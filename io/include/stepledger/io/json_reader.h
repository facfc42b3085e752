#pragma once
// One strict JSON reader for every JSON file the tool reads: plans, audits and public models.
//
// Strict means (every message starts with the source, line and column):
//   - malformed JSON ("plan.json:3:14: malformed JSON: unexpected '}'"), and text that is not
//     UTF-8 inside a string (nlohmann's lexer refuses it), are errors;
//   - a key repeated within one object is an error naming its key path and where the second
//     one starts ("audit.json:12:3: key 'model': duplicate key ..."): nlohmann would keep the
//     last silently, so an edited file could say two things at once;
//   - nesting deeper than JsonReadOptions::max_depth (64) is refused while parsing, before
//     anything deep is built, so no later recursive walk (nlohmann's dump, copy and ==,
//     quoting a value in a message) can exhaust the stack;
//   - a number beyond the range of a double (1e400) is an error naming where it starts (JSON
//     allows it; no double holds it).
// Cost: one pass over the text, linear in its size (the document is built from SAX events, not
// by nlohmann's callback parser, which is quadratic in the objects of an array); memory
// O(size of the document). The line and column of an
// error are counted from the start of the text, once, when it is thrown.

#include <cstddef>
#include <filesystem>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/engine/errors.h"

namespace stepledger {

struct JsonReadOptions {
  /// Deepest nesting of arrays and objects accepted (the top-level value is depth 1).
  /// Default 64: the deepest document the tool writes (an audit) nests 7 levels.
  std::size_t max_depth = 64;
};

/// A JSON text that cannot be read. key_path() is the path of the offending key for a duplicate
/// key ("terms[2].name"), empty for syntax, depth and number errors; detail() is the message
/// without the key path (it keeps "file:line:column"), so that callers with their own error type
/// (PlanError, which names the key itself) can rethrow it.
class JsonReadError : public InputError {
 public:
  JsonReadError(const std::string& message, std::string key_path, std::string detail)
      : InputError(message), key_path_(std::move(key_path)), detail_(std::move(detail)) {}
  const std::string& key_path() const { return key_path_; }
  const std::string& detail() const { return detail_; }

 private:
  std::string key_path_;
  std::string detail_;
};

/// Parses text strictly; source_name (a file name) starts every message.
/// Throws JsonReadError.
nlohmann::json ParseStrictJson(std::string_view text, std::string_view source_name,
                               const JsonReadOptions& options = {});

/// The bytes of a file. what ("plan file", "audit file") names it in messages: "cannot open
/// audit file 'x': No such file or directory", "... it is a folder". Throws InputError.
std::string ReadWholeFile(const std::filesystem::path& path, std::string_view what);

}  // namespace stepledger

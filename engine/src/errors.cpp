#include "stepledger/engine/errors.h"

#include <algorithm>

namespace stepledger {

std::string FormatLocation(std::string_view file, std::uint64_t line, std::uint64_t column) {
  std::string location(file);
  location += ':';
  location += std::to_string(line);
  if (column > 0) {
    location += ':';
    location += std::to_string(column);
  }
  return location;
}

LocatedInputError::LocatedInputError(std::string file, std::uint64_t line, std::uint64_t column,
                                     std::string detail)
    : InputError(FormatLocation(file, line, column) + ": " + detail),
      file_(std::move(file)),
      line_(line),
      column_(column),
      detail_(std::move(detail)) {}

LocatedInputError LocatedInputError::WithLinesBefore(std::uint64_t lines) const {
  return LocatedInputError(file_, line_ + lines, column_, detail_);
}

std::string QuoteForMessage(std::string_view text, std::size_t max_chars) {
  // The caller adds the surrounding quotes; this keeps the message on one line (control
  // bytes are escaped) and short. max_chars counts bytes of the original text; the cut
  // backs off to the start of a UTF-8 sequence so that no character is split in half.
  const bool shortened = text.size() > max_chars;
  std::size_t keep = std::min(text.size(), max_chars);
  if (shortened) {
    while (keep > 0 && (static_cast<unsigned char>(text[keep]) & 0xC0) == 0x80) --keep;
  }
  std::string out;
  out.reserve(keep + 3);
  static constexpr char kHex[] = "0123456789ABCDEF";
  for (std::size_t i = 0; i < keep; ++i) {
    const auto byte = static_cast<unsigned char>(text[i]);
    switch (byte) {
      case '\n': out += "\\n"; break;
      case '\r': out += "\\r"; break;
      case '\t': out += "\\t"; break;
      default:
        if (byte < 0x20 || byte == 0x7F) {
          out += "\\x";
          out += kHex[byte >> 4];
          out += kHex[byte & 0x0F];
        } else {
          out += static_cast<char>(byte);
        }
    }
  }
  if (shortened) out += "...";
  return out;
}

}  // namespace stepledger

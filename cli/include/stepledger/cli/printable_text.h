#pragma once
// Text from data files, plans and audits reaches the terminal through the command line's
// messages and tables. A column name or level holding ESC [ ... could move the cursor, recolour
// or retitle the terminal, and a stray 0xFF byte garbles the line; so what the command line
// prints to a terminal, and everything it prints to stderr, passes through this filter.
//
// The escape: a control character other than line feed and tab (U+0000–U+001F, U+007F) becomes
// "\xHH" (two upper-case hex digits, as QuoteForMessage writes); so does every byte that is not part of well-formed UTF-8
// (RFC 3629: no overlong forms, no surrogates, nothing above U+10FFFF). Everything else passes
// unchanged, so ordinary text, including non-ASCII names, prints as it is.

#include <memory>
#include <ostream>
#include <streambuf>
#include <string>
#include <string_view>

namespace stepledger {

/// text with control characters and malformed UTF-8 escaped as described above.
std::string PrintableText(std::string_view text);

/// An ostream that escapes what is written to it (as PrintableText) and passes it on to target.
/// Bytes of a UTF-8 sequence may arrive in separate writes; an unfinished sequence is held until
/// it completes or proves malformed, and is escaped at flush or destruction if still unfinished.
class PrintableTextStream : public std::ostream {
 public:
  explicit PrintableTextStream(std::ostream& target);
  ~PrintableTextStream() override;
  PrintableTextStream(const PrintableTextStream&) = delete;
  PrintableTextStream& operator=(const PrintableTextStream&) = delete;

 private:
  class Buffer;
  std::unique_ptr<Buffer> buffer_;
};

}  // namespace stepledger

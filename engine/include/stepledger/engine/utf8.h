#pragma once
// UTF-8 validity (RFC 3629): stepledger reads text as UTF-8, and every text it records (column
// names, levels) goes into JSON, which holds Unicode text only. Text that is not UTF-8 is
// refused where it is read, naming file:line:column (csv.h for column names, table_scan.h for
// levels); UTF8Replaced is for texts that are only shown to people (a file's name, a quoted
// cell), never for values that are read back.

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

namespace stepledger {

/// The byte offset of the first byte that does not start a well-formed UTF-8 sequence (an
/// invalid byte, a truncated sequence, an overlong form, a surrogate or a code point above
/// U+10FFFF), or nullopt when the text is UTF-8.
std::optional<std::size_t> FirstInvalidUtf8(std::string_view text);

/// The byte offset of the first NUL byte (U+0000 is well-formed UTF-8, but no name or level
/// holds one: a NUL in a data file means a file saved as UTF-16 or a binary file), or nullopt.
std::optional<std::size_t> FirstNulByte(std::string_view text);

/// What a message about a NUL byte adds after saying where it is.
inline constexpr std::string_view kNulByteAdvice =
    "; a data file is text, and a NUL byte comes from a file saved as UTF-16 or from a binary file: save it as "
    "UTF-8 text";

/// "byte 0xE9 at byte 4 of the text" for the first invalid byte, for messages; empty when valid.
std::string DescribeInvalidUtf8(std::string_view text);

/// The text with every ill-formed sequence replaced by U+FFFD (the replacement character).
std::string Utf8Replaced(std::string_view text);

}  // namespace stepledger

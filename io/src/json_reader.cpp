#include "stepledger/io/json_reader.h"

#include <algorithm>
#include <cerrno>
#include <cstdint>
#include <cstring>
#include <fstream>
#include <iterator>
#include <optional>
#include <set>
#include <vector>

#include "stepledger/engine/utf8.h"

namespace stepledger {

namespace {

using json = nlohmann::json;

// A pointer into the text that records, in a place shared by all its copies, how far nlohmann's
// lexer has read. The parser's callback and its errors then know where they are in the text:
// just past a '{' or '[' at object_start and array_start, just past a key's closing quote at
// key, and at most one byte past a number that overflows.
class TrackingIterator {
 public:
  using iterator_category = std::input_iterator_tag;
  using value_type = char;
  using difference_type = std::ptrdiff_t;
  using pointer = const char*;
  using reference = const char&;

  TrackingIterator(const char* position, const char** furthest) : position_(position), furthest_(furthest) {}
  reference operator*() const { return *position_; }
  TrackingIterator& operator++() {
    *furthest_ = ++position_;
    return *this;
  }
  TrackingIterator operator++(int) {
    TrackingIterator before = *this;
    ++*this;
    return before;
  }
  bool operator==(const TrackingIterator& other) const { return position_ == other.position_; }
  bool operator!=(const TrackingIterator& other) const { return position_ != other.position_; }

 private:
  const char* position_;
  const char** furthest_;
};

// nlohmann's reason quotes the bytes it last read ("last read: '\"caf\xE9'"), raw: bytes that are
// not UTF-8 are written as \xHH so that the message is printable text.
std::string PrintableReason(std::string_view reason) {
  static constexpr char kHex[] = "0123456789ABCDEF";
  std::string out;
  while (!reason.empty()) {
    const std::optional<std::size_t> bad = FirstInvalidUtf8(reason);
    if (!bad) {
      out += reason;
      break;
    }
    out += reason.substr(0, *bad);
    const auto byte = static_cast<unsigned char>(reason[*bad]);
    out += "\\x";
    out += kHex[byte >> 4];
    out += kHex[byte & 0x0F];
    reason.remove_prefix(*bad + 1);
  }
  return out;
}

// "file:line:column" of a byte offset (1-based line and byte column).
std::string LocationOf(std::string_view text, std::size_t offset, std::string_view source_name) {
  offset = std::min(offset, text.size());
  std::uint64_t line = 1;
  std::size_t line_start = 0;
  for (std::size_t i = 0; i < offset; ++i) {
    if (text[i] == '\n') {
      ++line;
      line_start = i + 1;
    }
  }
  return FormatLocation(source_name, line, offset - line_start + 1);
}

// Where the key whose closing quote is the byte before `after` starts (its opening quote).
std::size_t KeyStart(std::string_view text, std::size_t after) {
  if (after < 2) return 0;
  std::size_t i = after - 1;  // the closing quote
  while (i > 0) {
    --i;
    if (text[i] != '"') continue;
    std::size_t backslashes = 0;
    while (backslashes < i && text[i - 1 - backslashes] == '\\') ++backslashes;
    if (backslashes % 2 == 0) return i;
  }
  return 0;
}

bool IsNumberByte(char c) {
  return (c >= '0' && c <= '9') || c == '-' || c == '+' || c == '.' || c == 'e' || c == 'E';
}

// Where the number that ends at `after` or one byte before it starts.
std::size_t NumberStart(std::string_view text, std::size_t after) {
  std::size_t i = std::min(after, text.size());
  if (i > 0 && !IsNumberByte(text[i - 1])) --i;
  while (i > 0 && IsNumberByte(text[i - 1])) --i;
  return i;
}

// A key path for a message, at most about 80 characters: the first parts and the last one
// ("response[0][0][0]...[0] (65 levels)").
std::string ShortPath(const std::string& path) {
  constexpr std::size_t kLongest = 80;
  if (path.size() <= kLongest) return path;
  const std::size_t cut = path.find_first_of(".[", 40);
  const std::size_t last = path.find_last_of(".[");
  if (cut == std::string::npos || last == std::string::npos || last <= cut) return path.substr(0, kLongest) + "...";
  return path.substr(0, cut) + "..." + path.substr(last);
}

// Builds the document from nlohmann's SAX events (as its own DOM parser does), refusing duplicate
// keys and deep nesting as they come. nlohmann's callback parser is not used: after every object
// it scans the whole enclosing container for discarded values, which makes an array of n objects
// cost n^2 (an audit of 400,000 small objects took 100 s to read).
class StrictDocumentBuilder {
 public:
  StrictDocumentBuilder(std::string_view text, std::string_view source_name, std::size_t max_depth,
                        const char* const* furthest)
      : text_(text), source_name_(source_name), max_depth_(max_depth), furthest_(furthest) {}

  json& result() { return result_; }

  bool null() { return Add(json(nullptr)); }
  bool boolean(bool value) { return Add(json(value)); }
  bool number_integer(json::number_integer_t value) { return Add(json(value)); }
  bool number_unsigned(json::number_unsigned_t value) { return Add(json(value)); }
  bool number_float(json::number_float_t value, const json::string_t& /*text*/) { return Add(json(value)); }
  bool string(json::string_t& value) { return Add(json(std::move(value))); }
  bool binary(json::binary_t& value) { return Add(json::binary(std::move(value))); }

  bool start_object(std::size_t /*elements*/) { return Open(json::object()); }
  bool start_array(std::size_t /*elements*/) { return Open(json::array()); }
  bool end_object() { return Close(); }
  bool end_array() { return Close(); }

  bool key(json::string_t& key) {
    Frame& frame = frames_.back();
    if (frame.value->contains(key)) {
      frame.key = key;
      const std::string path = Path();
      const std::string location = LocationOf(text_, KeyStart(text_, Offset()), source_name_);
      const std::string detail = "duplicate key; each key may appear once in an object (" + location + ")";
      throw JsonReadError(location + ": key '" + path + "': duplicate key; each key may appear once in an object",
                          path, detail);
    }
    frame.key = std::move(key);
    return true;
  }

  bool parse_error(std::size_t position, const std::string& /*last_token*/, const json::exception& error) {
    if (error.id == 406) {
      // The only out_of_range of parsing: a number beyond the range of a double (1e400), which
      // JSON allows but no double holds.
      const std::size_t start = NumberStart(text_, std::min(position, Offset()));
      std::size_t end = start;
      while (end < text_.size() && IsNumberByte(text_[end])) ++end;
      const std::string number(text_.substr(start, std::min<std::size_t>(end - start, 40)));
      const std::string location = LocationOf(text_, start, source_name_);
      const std::string detail = "number " + number + (end - start > 40 ? "..." : "") +
                                 " is beyond the range of a double (about 1.8e308)";
      throw JsonReadError(location + ": " + detail, "", location + ": " + detail);
    }
    // position is the count of bytes read, the last of them the offending one.
    const std::size_t offset = std::min<std::size_t>(position == 0 ? 0 : position - 1, text_.size());
    std::string reason = error.what();
    // nlohmann's text starts "[json.exception.parse_error.101] parse error at line L, column C: ".
    if (const auto column_at = reason.find(", column "); column_at != std::string::npos) {
      if (const auto colon = reason.find(": ", column_at); colon != std::string::npos) {
        reason = reason.substr(colon + 2);
      }
    }
    reason = PrintableReason(reason);
    const std::string location = LocationOf(text_, offset, source_name_);
    throw JsonReadError(location + ": malformed JSON: " + reason, "", location + ": malformed JSON: " + reason);
  }

  std::size_t Offset() const { return static_cast<std::size_t>(*furthest_ - text_.data()); }

 private:
  struct Frame {
    json* value;      // the open object or array
    std::string key;  // an object's key whose value comes next
  };

  // Places a value: the document itself, the next element of an open array, or the member of
  // an open object under the key just read. Returns where it was placed.
  json* Place(json&& value) {
    if (frames_.empty()) {
      result_ = std::move(value);
      return &result_;
    }
    Frame& frame = frames_.back();
    if (frame.value->is_array()) {
      frame.value->push_back(std::move(value));
      return &frame.value->back();
    }
    json& member = (*frame.value)[frame.key];
    member = std::move(value);
    return &member;
  }
  bool Add(json&& value) {
    Place(std::move(value));
    return true;
  }
  bool Open(json&& container) {
    if (frames_.size() >= max_depth_) {
      const std::string where = frames_.empty() ? "the top" : ShortPath(Path(/*opening=*/true));
      const std::string detail = "nested deeper than " + std::to_string(max_depth_) +
                                 " levels of arrays and objects (at " + where + ")";
      const std::string location = LocationOf(text_, Offset() == 0 ? 0 : Offset() - 1, source_name_);
      throw JsonReadError(location + ": " + detail, "", location + ": " + detail);
    }
    // An element's pointer stays valid: its container gets no other element until it closes.
    json* placed = Place(std::move(container));
    frames_.push_back({placed, {}});
    return true;
  }
  bool Close() {
    frames_.pop_back();
    return true;
  }
  // The path of the value being read: keys and the index of the element an array is at (for the
  // innermost array, the element about to be placed when `opening`).
  std::string Path(bool opening = false) const {
    std::string path;
    for (std::size_t i = 0; i < frames_.size(); ++i) {
      const Frame& frame = frames_[i];
      if (frame.value->is_array()) {
        const std::size_t size = frame.value->size();
        const std::size_t index = opening && i + 1 == frames_.size() ? size : (size == 0 ? 0 : size - 1);
        path += "[" + std::to_string(index) + "]";
      } else {
        path += (path.empty() ? "" : ".") + frame.key;
      }
    }
    return path;
  }

  std::string_view text_;
  std::string_view source_name_;
  std::size_t max_depth_;
  const char* const* furthest_;
  json result_;
  std::vector<Frame> frames_;
};

}  // namespace

json ParseStrictJson(std::string_view text, std::string_view source_name,
                     const JsonReadOptions& options) {
  const char* furthest = text.data();
  StrictDocumentBuilder builder(text, source_name, std::max<std::size_t>(options.max_depth, 1), &furthest);
  const TrackingIterator first(text.data(), &furthest);
  const TrackingIterator last(text.data() + text.size(), &furthest);
  json::sax_parse(first, last, &builder);
  return std::move(builder.result());
}

std::string ReadWholeFile(const std::filesystem::path& path, std::string_view what) {
  const std::string quoted = "'" + path.string() + "'";
  std::error_code error;
  if (std::filesystem::is_directory(path, error)) {
    throw InputError("cannot open " + std::string(what) + " " + quoted + ": it is a folder");
  }
  std::ifstream stream(path, std::ios::binary);
  if (!stream) {
    throw InputError("cannot open " + std::string(what) + " " + quoted + ": " +
                     std::strerror(errno));
  }
  std::string text((std::istreambuf_iterator<char>(stream)), std::istreambuf_iterator<char>());
  if (stream.bad()) {
    throw InputError("cannot read " + std::string(what) + " " + quoted + ": " +
                     std::strerror(errno));
  }
  return text;
}

}  // namespace stepledger

#include "stepledger/io/json_reader.h"

#include <algorithm>
#include <cerrno>
#include <cstdint>
#include <cstring>
#include <fstream>
#include <iterator>
#include <set>
#include <vector>

namespace stepledger {

namespace {

using json = nlohmann::json;

// Follows the key path while nlohmann parses, to refuse duplicate keys and deep nesting.
class StrictParseGuard {
 public:
  StrictParseGuard(std::string_view source_name, std::size_t max_depth)
      : source_name_(source_name), max_depth_(max_depth) {}

  bool operator()(int /*depth*/, json::parse_event_t event, json& parsed) {
    switch (event) {
      case json::parse_event_t::object_start:
      case json::parse_event_t::array_start:
        StartElement();
        if (frames_.size() >= max_depth_) {
          const std::string detail = "nested deeper than " + std::to_string(max_depth_) +
                                     " levels (at " + (Path().empty() ? "the top" : Path()) + ")";
          throw JsonReadError(std::string(source_name_) + ": " + detail, "", detail);
        }
        frames_.push_back({event == json::parse_event_t::array_start, 0, {}, {}});
        break;
      case json::parse_event_t::object_end:
      case json::parse_event_t::array_end:
        frames_.pop_back();
        break;
      case json::parse_event_t::key: {
        Frame& frame = frames_.back();
        frame.key = parsed.get<std::string>();
        if (!frame.keys.insert(frame.key).second) {
          const std::string path = Path();
          const std::string detail = "duplicate key; each key may appear once";
          throw JsonReadError(std::string(source_name_) + ": key '" + path + "': " + detail, path,
                              detail);
        }
        break;
      }
      case json::parse_event_t::value:
        StartElement();
        break;
    }
    return true;
  }

 private:
  struct Frame {
    bool array = false;
    std::size_t elements = 0;
    std::set<std::string> keys;
    std::string key;
  };
  void StartElement() {
    if (!frames_.empty() && frames_.back().array) ++frames_.back().elements;
  }
  std::string Path() const {
    std::string path;
    for (const Frame& frame : frames_) {
      if (frame.array) {
        path += "[" + std::to_string(frame.elements == 0 ? 0 : frame.elements - 1) + "]";
      } else {
        path += (path.empty() ? "" : ".") + frame.key;
      }
    }
    return path;
  }
  std::string_view source_name_;
  std::size_t max_depth_;
  std::vector<Frame> frames_;
};

}  // namespace

json ParseStrictJson(std::string_view text, std::string_view source_name,
                     const JsonReadOptions& options) {
  StrictParseGuard guard(source_name, std::max<std::size_t>(options.max_depth, 1));
  try {
    return json::parse(text.begin(), text.end(), std::ref(guard));
  } catch (const json::parse_error& error) {
    // error.byte is the 1-based position of the last byte read; line and column from it.
    const std::size_t offset =
        std::min<std::size_t>(error.byte == 0 ? 0 : error.byte - 1, text.size());
    std::uint64_t line = 1;
    std::size_t line_start = 0;
    for (std::size_t i = 0; i < offset; ++i) {
      if (text[i] == '\n') {
        ++line;
        line_start = i + 1;
      }
    }
    std::string reason = error.what();
    // nlohmann's text starts "[json.exception.parse_error.101] parse error at line L, column C: ".
    if (const auto column_at = reason.find(", column "); column_at != std::string::npos) {
      if (const auto colon = reason.find(": ", column_at); colon != std::string::npos) {
        reason = reason.substr(colon + 2);
      }
    }
    const std::string location = FormatLocation(source_name, line, offset - line_start + 1);
    throw JsonReadError(location + ": malformed JSON: " + reason, "",
                        location + ": malformed JSON: " + reason);
  }
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

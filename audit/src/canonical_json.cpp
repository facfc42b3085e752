#include "stepledger/audit/canonical_json.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <string_view>
#include <vector>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

// UTF-8 text to UTF-16 code units, for RFC 8785's ordering of member names.
std::u16string ToUtf16(std::string_view text) {
  std::u16string units;
  units.reserve(text.size());
  for (std::size_t i = 0; i < text.size();) {
    auto byte = static_cast<unsigned char>(text[i]);
    char32_t code = 0;
    std::size_t length = 1;
    if (byte < 0x80) {
      code = byte;
    } else if ((byte >> 5) == 0x6) {
      code = byte & 0x1f;
      length = 2;
    } else if ((byte >> 4) == 0xe) {
      code = byte & 0x0f;
      length = 3;
    } else {
      code = byte & 0x07;
      length = 4;
    }
    for (std::size_t k = 1; k < length && i + k < text.size(); ++k) {
      code = (code << 6) | (static_cast<unsigned char>(text[i + k]) & 0x3f);
    }
    i += length;
    if (code >= 0x10000) {
      code -= 0x10000;
      units.push_back(static_cast<char16_t>(0xd800 + (code >> 10)));
      units.push_back(static_cast<char16_t>(0xdc00 + (code & 0x3ff)));
    } else {
      units.push_back(static_cast<char16_t>(code));
    }
  }
  return units;
}

void AppendString(std::string& out, std::string_view text) {
  static constexpr char kHex[] = "0123456789abcdef";
  out.push_back('"');
  for (char c : text) {
    auto byte = static_cast<unsigned char>(c);
    switch (c) {
      case '"': out += "\\\""; break;
      case '\\': out += "\\\\"; break;
      case '\b': out += "\\b"; break;
      case '\f': out += "\\f"; break;
      case '\n': out += "\\n"; break;
      case '\r': out += "\\r"; break;
      case '\t': out += "\\t"; break;
      default:
        if (byte < 0x20) {
          out += "\\u00";
          out.push_back(kHex[byte >> 4]);
          out.push_back(kHex[byte & 0x0f]);
        } else {
          out.push_back(c);  // UTF-8 passes through unescaped, as RFC 8785 asks
        }
    }
  }
  out.push_back('"');
}

using json = nlohmann::json;

// A container being written: its value, the next element, and an object's members in RFC 8785
// order.
struct OpenContainer {
  const json* value = nullptr;
  std::size_t next = 0;
  std::vector<std::pair<std::u16string, json::const_iterator>> members;
};

// Writes a scalar, or opens a container (its bracket written, pushed on the stack).
void Open(std::string& out, const json& value, std::vector<OpenContainer>& stack) {
  using Type = json::value_t;
  switch (value.type()) {
    case Type::null: out += "null"; return;
    case Type::boolean: out += value.get<bool>() ? "true" : "false"; return;
    case Type::number_integer: out += std::to_string(value.get<std::int64_t>()); return;
    case Type::number_unsigned: out += std::to_string(value.get<std::uint64_t>()); return;
    case Type::number_float: out += CanonicalNumber(value.get<double>()); return;
    case Type::string: AppendString(out, value.get_ref<const std::string&>()); return;
    case Type::array:
      out.push_back('[');
      stack.push_back({&value, 0, {}});
      return;
    case Type::object: {
      out.push_back('{');
      OpenContainer container{&value, 0, {}};
      container.members.reserve(value.size());
      for (auto it = value.begin(); it != value.end(); ++it) container.members.emplace_back(ToUtf16(it.key()), it);
      std::sort(container.members.begin(), container.members.end(),
                [](const auto& a, const auto& b) { return a.first < b.first; });
      stack.push_back(std::move(container));
      return;
    }
    case Type::binary:
    case Type::discarded:
      throw InputError("canonical JSON: a binary or discarded value has no JSON form");
  }
}

// Depth-first with an explicit stack, so that no nesting, however deep, can exhaust the call
// stack (documents read from files are limited to 64 levels by the JSON reader; a value built
// in memory is not).
void Append(std::string& out, const json& root) {
  std::vector<OpenContainer> stack;
  Open(out, root, stack);
  while (!stack.empty()) {
    OpenContainer& top = stack.back();
    if (top.value->is_array()) {
      if (top.next == top.value->size()) {
        out.push_back(']');
        stack.pop_back();
        continue;
      }
      if (top.next > 0) out.push_back(',');
      const json& element = (*top.value)[top.next++];
      Open(out, element, stack);  // may push: `top` is not used after this
    } else {
      if (top.next == top.members.size()) {
        out.push_back('}');
        stack.pop_back();
        continue;
      }
      if (top.next > 0) out.push_back(',');
      const json::const_iterator member = top.members[top.next++].second;
      AppendString(out, member.key());
      out.push_back(':');
      Open(out, member.value(), stack);
    }
  }
}

}  // namespace

std::string CanonicalNumber(double value) {
  if (!std::isfinite(value)) throw InputError("canonical JSON: NaN and infinity are not JSON numbers");
  if (value == 0) return "0";
  // Shortest round-trip digits in scientific form: "d.ddde+XX" or "de-XX".
  char buffer[64];
  auto [end, error] = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::scientific);
  std::string_view text(buffer, static_cast<std::size_t>(end - buffer));
  std::string result;
  if (text.front() == '-') {
    result.push_back('-');
    text.remove_prefix(1);
  }
  const std::size_t e_position = text.find('e');
  std::string digits;
  for (char c : text.substr(0, e_position)) {
    if (c != '.') digits.push_back(c);
  }
  int exponent = 0;
  std::string_view exponent_text = text.substr(e_position + 1);
  if (exponent_text.front() == '+') exponent_text.remove_prefix(1);
  std::from_chars(exponent_text.data(), exponent_text.data() + exponent_text.size(), exponent);
  // ECMA-262 Number::toString: value = 0.digits x 10^n with n = exponent + 1.
  const int k = static_cast<int>(digits.size());
  const int n = exponent + 1;
  if (k <= n && n <= 21) {
    result += digits;
    result.append(static_cast<std::size_t>(n - k), '0');
  } else if (0 < n && n <= 21) {
    result += digits.substr(0, static_cast<std::size_t>(n));
    result.push_back('.');
    result += digits.substr(static_cast<std::size_t>(n));
  } else if (-6 < n && n <= 0) {
    result += "0.";
    result.append(static_cast<std::size_t>(-n), '0');
    result += digits;
  } else {
    result.push_back(digits[0]);
    if (k > 1) {
      result.push_back('.');
      result += digits.substr(1);
    }
    result.push_back('e');
    result.push_back(n - 1 >= 0 ? '+' : '-');
    result += std::to_string(std::abs(n - 1));
  }
  return result;
}

std::string CanonicalJson(const nlohmann::json& value) {
  std::string out;
  Append(out, value);
  return out;
}

}  // namespace stepledger

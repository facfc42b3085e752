#pragma once
// Reading the keys of a parsed audit with messages that name the key path
// ("audit.json: key 'prediction.triangle[2]': expected an array of numbers, found string").
// Every reader of an audit's content goes through it, so that a wrong type or an out-of-range
// number in a (re-sealed) audit is bad input naming its key, never an exception of the JSON
// library (an internal error). Integers are range-checked before they are converted: an
// unsigned 2^64 - 1 never wraps to -1.

#include <cstdint>
#include <limits>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/engine/errors.h"

namespace stepledger::audit_detail {

class AuditReader {
 public:
  using json = nlohmann::json;

  explicit AuditReader(std::string_view source) : source_(source) {}

  const std::string& source() const { return source_; }

  [[noreturn]] void Fail(const std::string& path, const std::string& message) const {
    throw InputError(source_ + ": key '" + path + "': " + message);
  }

  /// The member, or nullptr when the parent is not an object or lacks it.
  static const json* Find(const json& parent, std::string_view key) {
    if (!parent.is_object()) return nullptr;
    const auto found = parent.find(key);
    return found == parent.end() ? nullptr : &*found;
  }

  const json& Member(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json* value = Find(parent, key);
    if (value == nullptr) Fail(Join(parent_path, key), "missing");
    return *value;
  }
  const json& Object(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json& value = Member(parent, parent_path, key);
    if (!value.is_object()) Fail(Join(parent_path, key), "expected an object, found " + TypeOf(value));
    return value;
  }
  const json& Array(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json& value = Member(parent, parent_path, key);
    if (!value.is_array()) Fail(Join(parent_path, key), "expected an array, found " + TypeOf(value));
    return value;
  }
  /// An array, or an empty one when the key is absent (a section an older audit lacks).
  const json& OptionalArray(const json& parent, const std::string& parent_path, const std::string& key) const {
    static const json kEmpty = json::array();
    const json* value = Find(parent, key);
    if (value == nullptr) return kEmpty;
    if (!value->is_array()) Fail(Join(parent_path, key), "expected an array, found " + TypeOf(*value));
    return *value;
  }
  std::string String(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json* value = Find(parent, key);
    if (value == nullptr) Fail(Join(parent_path, key), "missing");
    if (!value->is_string()) Fail(Join(parent_path, key), "expected a string, found " + TypeOf(*value));
    return value->get<std::string>();
  }
  /// A string, or nullopt for null or an absent key.
  std::optional<std::string> OptionalString(const json& parent, const std::string& parent_path,
                                            const std::string& key) const {
    const json* value = Find(parent, key);
    if (value == nullptr || value->is_null()) return std::nullopt;
    if (!value->is_string()) Fail(Join(parent_path, key), "expected a string or null, found " + TypeOf(*value));
    return value->get<std::string>();
  }
  bool Bool(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json& value = Member(parent, parent_path, key);
    if (!value.is_boolean()) Fail(Join(parent_path, key), "expected true or false, found " + TypeOf(value));
    return value.get<bool>();
  }
  /// A boolean, or fallback when the key is absent.
  bool OptionalBool(const json& parent, const std::string& parent_path, const std::string& key, bool fallback) const {
    return Find(parent, key) == nullptr ? fallback : Bool(parent, parent_path, key);
  }
  double Number(const json& parent, const std::string& parent_path, const std::string& key) const {
    const json& value = Member(parent, parent_path, key);
    if (!value.is_number()) Fail(Join(parent_path, key), "expected a number, found " + TypeOf(value));
    return value.get<double>();
  }
  /// A number, or nullopt for null or an absent key (what NumberOrNull writes for undefined).
  std::optional<double> OptionalNumber(const json& parent, const std::string& parent_path,
                                       const std::string& key) const {
    const json* value = Find(parent, key);
    if (value == nullptr || value->is_null()) return std::nullopt;
    if (!value->is_number()) Fail(Join(parent_path, key), "expected a number or null, found " + TypeOf(*value));
    return value->get<double>();
  }
  /// A JSON integer (not 3.0) in [minimum, maximum], checked before any conversion.
  std::int64_t Integer(const json& value, const std::string& path, std::int64_t minimum,
                       std::int64_t maximum = std::numeric_limits<std::int64_t>::max()) const {
    const std::string range = maximum == std::numeric_limits<std::int64_t>::max()
                                  ? "an integer >= " + std::to_string(minimum)
                                  : "an integer from " + std::to_string(minimum) + " to " + std::to_string(maximum);
    if (!value.is_number_integer()) Fail(path, "expected " + range + ", found " + Shown(value));
    if (value.is_number_unsigned()) {
      const std::uint64_t number = value.get<std::uint64_t>();
      if (maximum < 0 || number > static_cast<std::uint64_t>(maximum)) Fail(path, "expected " + range + ", found " + Shown(value));
      if (static_cast<std::int64_t>(number) < minimum) Fail(path, "expected " + range + ", found " + Shown(value));
      return static_cast<std::int64_t>(number);
    }
    const std::int64_t number = value.get<std::int64_t>();
    if (number < minimum || number > maximum) Fail(path, "expected " + range + ", found " + Shown(value));
    return number;
  }
  std::int64_t Integer(const json& parent, const std::string& parent_path, const std::string& key,
                       std::int64_t minimum, std::int64_t maximum = std::numeric_limits<std::int64_t>::max()) const {
    return Integer(Member(parent, parent_path, key), Join(parent_path, key), minimum, maximum);
  }
  /// A count: a JSON integer from 0 to 2^63 - 1.
  std::uint64_t Count(const json& parent, const std::string& parent_path, const std::string& key) const {
    return static_cast<std::uint64_t>(Integer(parent, parent_path, key, 0));
  }
  /// A count, or nullopt for null or an absent key.
  std::optional<std::uint64_t> OptionalCount(const json& parent, const std::string& parent_path,
                                             const std::string& key) const {
    const json* value = Find(parent, key);
    if (value == nullptr || value->is_null()) return std::nullopt;
    return static_cast<std::uint64_t>(Integer(*value, Join(parent_path, key), 0));
  }
  std::vector<double> Numbers(const json& array, const std::string& path) const {
    if (!array.is_array()) Fail(path, "expected an array of numbers, found " + TypeOf(array));
    std::vector<double> values;
    values.reserve(array.size());
    for (std::size_t i = 0; i < array.size(); ++i) {
      if (!array[i].is_number()) Fail(Index(path, i), "expected a number, found " + TypeOf(array[i]));
      values.push_back(array[i].get<double>());
    }
    return values;
  }
  std::vector<std::string> Strings(const json& array, const std::string& path) const {
    if (!array.is_array()) Fail(path, "expected an array of strings, found " + TypeOf(array));
    std::vector<std::string> values;
    values.reserve(array.size());
    for (std::size_t i = 0; i < array.size(); ++i) {
      if (!array[i].is_string()) Fail(Index(path, i), "expected a string, found " + TypeOf(array[i]));
      values.push_back(array[i].get<std::string>());
    }
    return values;
  }
  /// An array element that must be an object.
  const json& ObjectAt(const json& array, const std::string& path, std::size_t index) const {
    const json& value = array[index];
    if (!value.is_object()) Fail(Index(path, index), "expected an object, found " + TypeOf(value));
    return value;
  }

  static std::string Join(const std::string& parent_path, const std::string& key) {
    return parent_path.empty() ? key : parent_path + "." + key;
  }
  static std::string Index(const std::string& path, std::size_t index) {
    return path + "[" + std::to_string(index) + "]";
  }
  /// The JSON type's name, for "expected ..., found string".
  static std::string TypeOf(const json& value) { return value.type_name(); }
  /// The value as JSON text, shortened ("18446744073709551615", "\"x\"").
  static std::string Shown(const json& value) {
    if (value.is_structured()) return TypeOf(value);
    return QuoteForMessage(value.dump(), 40);
  }

 private:
  std::string source_;
};

}  // namespace stepledger::audit_detail

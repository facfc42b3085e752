#include "stepledger/engine/limits.h"

#include <cstdint>
#include <limits>
#include <utility>

#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

constexpr std::array<std::pair<LimitKind, const char*>, 5> kLimitNames{{
    {LimitKind::kColumns, "columns"},
    {LimitKind::kTerms, "terms"},
    {LimitKind::kDesignColumns, "design-columns"},
    {LimitKind::kLevels, "levels"},
    {LimitKind::kPlanBytes, "plan-bytes"},
}};

std::string Count(std::uint64_t value) {
  return value > static_cast<std::uint64_t>(INT64_MAX) ? std::to_string(value)
                                                      : FormatCount(static_cast<std::int64_t>(value));
}

}  // namespace

const char* ToString(LimitKind limit) {
  for (const auto& [kind, name] : kLimitNames) {
    if (kind == limit) return name;
  }
  return "?";
}

std::optional<LimitKind> LimitKindFromString(std::string_view text) {
  for (const auto& [kind, name] : kLimitNames) {
    if (text == name) return kind;
  }
  return std::nullopt;
}

InputLimits InputLimits::Unlimited() {
  InputLimits limits;
  for (const LimitKind limit : kAllLimitKinds) limits.Set(limit, std::numeric_limits<std::uint64_t>::max());
  return limits;
}

std::uint64_t InputLimits::Get(LimitKind limit) const {
  switch (limit) {
    case LimitKind::kColumns: return columns;
    case LimitKind::kTerms: return terms;
    case LimitKind::kDesignColumns: return design_columns;
    case LimitKind::kLevels: return levels;
    case LimitKind::kPlanBytes: return plan_bytes;
  }
  return 0;
}

void InputLimits::Set(LimitKind limit, std::uint64_t value) {
  switch (limit) {
    case LimitKind::kColumns: columns = value; break;
    case LimitKind::kTerms: terms = value; break;
    case LimitKind::kDesignColumns: design_columns = value; break;
    case LimitKind::kLevels: levels = value; break;
    case LimitKind::kPlanBytes: plan_bytes = value; break;
  }
}

void InputLimits::Validate() const {
  for (const LimitKind limit : kAllLimitKinds) {
    if (Get(limit) == 0) {
      throw InputError(std::string("limit '") + ToString(limit) + "': expected an integer >= 1, found 0");
    }
  }
}

LimitError::LimitError(LimitKind limit, std::uint64_t value, const std::string& place, const std::string& seen,
                       const std::string& remedy)
    : InputError(place + ": " + seen + "; the " + ToString(limit) + " limit is " + Count(value) +
                 (remedy.empty() ? std::string() : "; " + remedy)),
      limit_(limit),
      value_(value) {}

}  // namespace stepledger

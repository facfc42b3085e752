#include "stepledger/selection/plan.h"

#include <array>
#include <utility>

namespace stepledger {
namespace {

constexpr std::array<std::pair<Method, const char*>, 5> kMethodNames{{
    {Method::kForward, "forward"},
    {Method::kBackward, "backward"},
    {Method::kStepwise, "stepwise"},
    {Method::kAllSubsets, "all-subsets"},
    {Method::kNone, "none"},
}};

constexpr std::array<std::pair<Criterion, const char*>, 7> kCriterionNames{{
    {Criterion::kAdjR2, "adj-r2"},
    {Criterion::kAic, "aic"},
    {Criterion::kAicc, "aicc"},
    {Criterion::kBic, "bic"},
    {Criterion::kCp, "cp"},
    {Criterion::kPartialF, "partial-f"},
    {Criterion::kCv, "cv"},
}};

template <typename Enum, std::size_t N>
const char* NameOf(const std::array<std::pair<Enum, const char*>, N>& table, Enum value) {
  for (const auto& [candidate, name] : table) {
    if (candidate == value) return name;
  }
  return "?";
}

template <typename Enum, std::size_t N>
std::optional<Enum> ValueOf(const std::array<std::pair<Enum, const char*>, N>& table,
                            std::string_view text) {
  for (const auto& [candidate, name] : table) {
    if (text == name) return candidate;
  }
  return std::nullopt;
}

}  // namespace

const char* ToString(Method method) { return NameOf(kMethodNames, method); }
std::optional<Method> MethodFromString(std::string_view text) { return ValueOf(kMethodNames, text); }
const char* ToString(Criterion criterion) { return NameOf(kCriterionNames, criterion); }
std::optional<Criterion> CriterionFromString(std::string_view text) {
  return ValueOf(kCriterionNames, text);
}

}  // namespace stepledger

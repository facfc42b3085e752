#include "stepledger/engine/number_format.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>

namespace stepledger {

namespace {

constexpr const char* kUndefined = "n/a";

// Inserts "," every three digits in the integer part of a plain decimal text ("-1234.5").
std::string GroupThousands(std::string text) {
  const std::size_t start = (!text.empty() && (text[0] == '-' || text[0] == '+')) ? 1 : 0;
  std::size_t end = text.find('.');
  if (end == std::string::npos) end = text.size();
  for (std::size_t position = end; position > start + 3;) {
    position -= 3;
    text.insert(position, ",");
  }
  return text;
}

std::string Printf(const char* format, int precision, double value) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, format, precision, value);
  return buffer;
}

}  // namespace

std::string FormatQuantity(std::optional<double> value, int significant) {
  if (!value || !std::isfinite(*value)) return kUndefined;
  significant = std::clamp(significant, 1, 17);
  const double x = *value;
  if (x == 0) return "0";
  // A whole number (a count, an age in months, a price in whole units) prints as one.
  if (std::fabs(x) < 1e15 && x == std::nearbyint(x)) return GroupThousands(Printf("%.*f", 0, x));
  // Round to the significant digits first, so that 9.99996 at 4 digits is seen as 10.00 and
  // gets the decimals of a two-digit integer part.
  const std::string rounded = Printf("%.*e", significant - 1, x);
  const int exponent = std::atoi(rounded.c_str() + rounded.find('e') + 1);
  if (exponent >= 15 || exponent < -5) return rounded;
  const int decimals = std::max(0, significant - 1 - exponent);
  return GroupThousands(Printf("%.*f", decimals, x));
}

std::string FormatFixed(std::optional<double> value, int decimals) {
  if (!value || !std::isfinite(*value)) return kUndefined;
  decimals = std::clamp(decimals, 0, 12);
  std::string text = Printf("%.*f", decimals, *value);
  if (text == "-0" || text.rfind("-0.", 0) == 0) {
    // "-0.00": a negative number that rounds to zero prints without its sign.
    if (text.find_first_not_of("-0.") == std::string::npos) text.erase(0, 1);
  }
  return GroupThousands(std::move(text));
}

std::string FormatStatistic(std::optional<double> value) { return FormatFixed(value, 2); }

std::string FormatPValue(std::optional<double> value) {
  if (!value || !std::isfinite(*value)) return kUndefined;
  if (*value < kPValueFloor) return "< 0.0001";
  return Printf("%.*f", 4, std::min(*value, 1.0));
}

std::string PValueClause(std::optional<double> value) {
  const std::string text = FormatPValue(value);
  if (text == kUndefined) return "p n/a";
  if (text[0] == '<') return "p " + text;
  return "p = " + text;
}

std::string FormatCount(std::int64_t count) { return GroupThousands(std::to_string(count)); }

std::string FormatPercent(std::optional<double> share) {
  if (!share || !std::isfinite(*share)) return kUndefined;
  return FormatFixed(*share * 100, 1) + "%";
}

std::string FormatFTest(std::optional<double> f, std::int64_t df_model, std::int64_t df_residual,
                        std::optional<double> p) {
  if (!f || !std::isfinite(*f)) return "F n/a";
  return "F(" + std::to_string(df_model) + ", " + std::to_string(df_residual) +
         ") = " + FormatStatistic(f) + ", " + PValueClause(p);
}

}  // namespace stepledger

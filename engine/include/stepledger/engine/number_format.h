#pragma once
// One number policy for people (text tables, HTML, messages, cautions, route rules). JSON never
// goes through here: it keeps every number at full precision (and counts as integers).
//
// The policy, in one place so that the terminal, the HTML report and every message say the same
// thing of the same number:
//   - Undefined values print as "n/a".
//   - Quantities (money, sums of squares, criteria, estimates, ranges) print in fixed point with
//     `significant` significant digits (default 4) and thousands separators in the integer part:
//     1234567.8 -> "1,234,568" (the integer part is never rounded away), 12.345678 -> "12.35",
//     -5.99123 -> "-5.991",
//     0.0123456 -> "0.01235"; a whole number prints without decimals (40 -> "40", not
//     "40.00"). Where fixed point would need more than 15 integer digits or more
//     than 4 leading zeros after the point, scientific notation is used instead ("1.23e-07"),
//     so that a number never hides as "0.0000".
//   - Criteria compared between models (AIC, BIC, Cp, RSS in a table of candidates) print with
//     FormatFixed and a fixed number of decimals, so that close values stay apart.
//   - Test statistics (F, t) print with two decimals and separators ("4,460.68"), as in APA
//     style.
//   - p-values print with four decimals ("0.0321") and one floor, "< 0.0001", everywhere.
//     PValueClause gives the APA clause: "p = 0.0321" or "p < 0.0001".
//   - Counts print as integers with thousands separators ("1,923").
//   - Percentages print with one decimal ("12.5%").
//
// Cost: O(digits). Thread-safe (no locale is consulted: the separator is always ",", the
// decimal mark always ".").

#include <cstdint>
#include <optional>
#include <string>

namespace stepledger {

/// Significant digits for quantities when a caller does not choose (common practice).
inline constexpr int kDefaultSignificantDigits = 4;
/// The p-value floor for people: smaller values print as "< 0.0001".
inline constexpr double kPValueFloor = 1e-4;

/// A quantity with `significant` significant digits (1..17), fixed point with thousands
/// separators, scientific where fixed point would mislead (see above); "n/a" when undefined or
/// not finite.
std::string FormatQuantity(std::optional<double> value, int significant = kDefaultSignificantDigits);

/// A value with exactly `decimals` decimals (0..12) and thousands separators ("4,460.68");
/// "n/a" when undefined or not finite.
std::string FormatFixed(std::optional<double> value, int decimals);

/// A test statistic (F, t, z): FormatFixed with two decimals.
std::string FormatStatistic(std::optional<double> value);

/// A p-value: "0.0321", or "< 0.0001" below the floor; "n/a" when undefined.
std::string FormatPValue(std::optional<double> value);

/// The APA clause for a p-value: "p = 0.0321", "p < 0.0001", "p n/a".
std::string PValueClause(std::optional<double> value);

/// An integer count with thousands separators ("1,923", "-12").
std::string FormatCount(std::int64_t count);

/// A share in [0, 1] as a percentage with one decimal ("12.5%"); "n/a" when undefined.
std::string FormatPercent(std::optional<double> share);

/// The overall F test of a model in APA style: "F(12, 1910) = 4,460.68, p < 0.0001".
/// "F n/a" when the statistic is undefined.
std::string FormatFTest(std::optional<double> f, std::int64_t df_model, std::int64_t df_residual,
                        std::optional<double> p);

}  // namespace stepledger

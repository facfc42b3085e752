#pragma once
// How large an input may be: columns in a data file, terms in a plan, design columns, levels
// kept per column and bytes of a plan file. Each limit is checked before the work or the memory
// that grows with it (a header is counted while it is read, a plan file's size before it is
// read, a product's columns before they are made), and an input over a limit is refused with a
// LimitError (bad input, exit 2) naming the place, the limit, its value and what was seen.
//
// Limits protect the machine that runs a command, not the model: they are options of the run
// (the command line's `--limit NAME=N`), never read from a plan or an audit, so that a file
// someone else wrote cannot lift them; a replay (`verify --data`, `rerun`) uses the limits of its
// own command line. They are not recorded in the audit (they cannot change a result, only refuse
// one). The defaults and the memory behind each are in the README ("Limits").

#include <array>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "stepledger/engine/errors.h"

namespace stepledger {

enum class LimitKind { kColumns, kTerms, kDesignColumns, kLevels, kPlanBytes };

/// Every limit, in the order the README lists them.
inline constexpr std::array<LimitKind, 5> kAllLimitKinds = {
    LimitKind::kColumns, LimitKind::kTerms, LimitKind::kDesignColumns, LimitKind::kLevels,
    LimitKind::kPlanBytes};

/// The names the command line and the messages use: "columns", "terms", "design-columns",
/// "levels", "plan-bytes".
const char* ToString(LimitKind limit);
std::optional<LimitKind> LimitKindFromString(std::string_view text);

struct InputLimits {
  /// Columns in a data file's header (also a `predict` rows file). Default 10,000. Counted while
  /// the header is read, so a wider header is refused after reading at most this many names.
  /// Memory of a scan is O(columns x levels) per reading thread (below).
  std::uint64_t columns = 10'000;
  /// Terms of a plan, explicit or made by "terms": "all" (the quick form). Default 2,000. A plan
  /// file's list is counted before any term is read; "all" is counted before any term is built.
  std::uint64_t terms = 2'000;
  /// Design columns: the intercept, one per numeric, power or log term, k - 1 per categorical
  /// term of k levels, and for a product the product of its parts' counts. Default 5,000. The
  /// factor is (m + 1)^2 doubles (200 MB at m = 5,000) and a run holds about threads + 3 of them;
  /// each term's count is known before its columns are made, so a 150 x 150-level product is
  /// refused before any of its 22,201 columns exists.
  std::uint64_t design_columns = 5'000;
  /// Distinct levels the scan keeps per column (ProfileOptions::max_levels); a column with more
  /// cannot be a categorical term (the plan's `max_levels`, default 100, is the modelling rule
  /// below this limit). Default 1,000: a scan holds at most columns x levels level texts.
  std::uint64_t levels = 1'000;
  /// Bytes of a plan file, checked before it is read. Default 16 MiB (a plan of 2,000 terms is
  /// about 150 KB).
  std::uint64_t plan_bytes = std::uint64_t{16} << 20;

  /// Every limit at its largest value: for rebuilding a part of a design that was already
  /// built within the limits of its run.
  static InputLimits Unlimited();

  std::uint64_t Get(LimitKind limit) const;
  void Set(LimitKind limit, std::uint64_t value);
  /// Throws InputError naming the limit when a value is 0.
  void Validate() const;
  bool operator==(const InputLimits&) const = default;
};

/// An input over one of the InputLimits: bad input (exit 2). what() is the whole message without
/// the advice on raising the limit, which the caller adds in its own terms (the command line
/// says `--limit NAME=N`); limit() and value() say which limit and its value.
class LimitError : public InputError {
 public:
  /// place: "data.csv:1:40213" or "plan key 'terms'"; seen: what the input holds, e.g. "the
  /// header goes on past column 10,000". The message is "place: seen; the NAME limit is VALUE",
  /// then "; " and remedy (another way out than a larger limit) when remedy is not empty.
  LimitError(LimitKind limit, std::uint64_t value, const std::string& place, const std::string& seen,
             const std::string& remedy = "");
  LimitKind limit() const { return limit_; }
  std::uint64_t value() const { return value_; }

 private:
  LimitKind limit_;
  std::uint64_t value_;
};

}  // namespace stepledger

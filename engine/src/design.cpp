#include "stepledger/engine/design.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <limits>
#include <set>
#include <string_view>
#include <utility>

#include "design_magnitude.h"
#include "design_quote.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {

const char* ToString(TermKind kind) {
  switch (kind) {
    case TermKind::kNumeric: return "numeric";
    case TermKind::kPower: return "power";
    case TermKind::kLog: return "log";
    case TermKind::kCategorical: return "categorical";
    case TermKind::kProduct: return "product";
  }
  return "?";
}

const char* ToString(DropReason reason) {
  switch (reason) {
    case DropReason::kMissing: return "missing";
    case DropReason::kZeroWeight: return "zero weight";
  }
  return "?";
}

const char* ToString(ResponseTransform transform) {
  switch (transform) {
    case ResponseTransform::kNone: return "none";
    case ResponseTransform::kLog: return "log";
  }
  return "?";
}

namespace {

using design_detail::EvaluationOrder;
using design_detail::kInterceptName;
using design_detail::Quote;
using design_detail::QuotePath;
using design_detail::SourceKeySuffix;
using design_detail::TermKey;

// Levenshtein distance, case-insensitive; names are short so O(|a||b|) is nothing.
std::size_t EditDistance(std::string_view a, std::string_view b) {
  auto lower = [](char c) { return static_cast<char>(std::tolower(static_cast<unsigned char>(c))); };
  std::vector<std::size_t> previous(b.size() + 1), current(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) previous[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    current[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t substitution = previous[j - 1] + (lower(a[i - 1]) == lower(b[j - 1]) ? 0 : 1);
      current[j] = std::min({previous[j] + 1, current[j - 1] + 1, substitution});
    }
    std::swap(previous, current);
  }
  return previous[b.size()];
}

// " (close names: 'a', 'b')" or "" — a typo in a column name is the usual cause.
std::string CloseNames(std::string_view name, const DataProfile& profile) {
  std::vector<std::pair<std::size_t, std::string>> close;
  const std::size_t limit = std::max<std::size_t>(2, name.size() / 3);
  for (const auto& column : profile.columns) {
    const std::size_t distance = EditDistance(name, column.name);
    if (distance <= limit) close.emplace_back(distance, column.name);
  }
  if (close.empty()) return "";
  std::stable_sort(close.begin(), close.end(),
                   [](const auto& a, const auto& b) { return a.first < b.first; });
  std::string text = " (close names: ";
  for (std::size_t i = 0; i < close.size() && i < 3; ++i) {
    if (i > 0) text += ", ";
    text += Quote(close[i].second);
  }
  return text + ")";
}

std::string Where(const DataProfile& profile, const CellLocation& location) {
  return FormatLocation(LocationFile(profile, location), location.line, location.column);
}

const ColumnProfile& RequireColumn(const DataProfile& profile, const std::string& name,
                                   const std::string& key) {
  const ColumnProfile* column = profile.Find(name);
  if (column == nullptr) {
    const std::optional<std::string> separator_hint =
        SeparatorHint(profile.columns.size(), profile.columns.empty() ? "" : profile.columns.front().name);
    throw PlanError(key, "no column named " + Quote(name) + " in " + QuotePath(profile.path) +
                             (separator_hint ? "; " + *separator_hint : CloseNames(name, profile)));
  }
  return *column;
}

// "F:L:C holds 'abc'" for a column the profile found to be categorical.
std::string FirstText(const DataProfile& profile, const ColumnProfile& column) {
  if (!column.first_text) return "it holds text";
  return Where(profile, *column.first_text) + " holds " + Quote(column.first_text->text);
}

void RequireNumeric(const DataProfile& profile, const ColumnProfile& column, const std::string& key,
                    const std::string& role) {
  if (column.kind == ColumnKind::kEmpty) {
    throw PlanError(key, role + " " + Quote(column.name) + " has no values (every cell is missing)");
  }
  if (column.kind != ColumnKind::kNumeric) {
    throw PlanError(key, role + " " + Quote(column.name) + " must be numeric, but " +
                             FirstText(profile, column));
  }
}

// An exact power of two near 1/bound, so that scaled values are of order 1 whatever the
// chunking (the bound comes from the profile, not from the rows of a chunk).
double ScaleForBound(double bound) {
  if (!(bound > 0) || !std::isfinite(bound)) return 1.0;
  const long exponent = std::clamp(std::lround(std::log2(bound)), -1000L, 1000L);
  return std::ldexp(1.0, static_cast<int>(-exponent));
}

double AbsoluteBound(const ColumnProfile& column) {
  return std::max(std::fabs(column.min), std::fabs(column.max));
}

double LogBound(const ColumnProfile& column) {
  if (!(column.min > 0)) return std::numeric_limits<double>::infinity();
  return std::max(std::fabs(std::log(column.min)), std::fabs(std::log(column.max)));
}

// A term being built, before the columns are laid out in plan order.
struct PendingTerm {
  DesignTerm term;
  std::vector<std::string> column_names;
  std::vector<double> bounds;
  std::ptrdiff_t header_index = -1;
  std::map<std::string, std::size_t, std::less<>> level_index;
};

std::string JoinLevels(const std::vector<LevelCount>& levels) {
  std::string text;
  for (std::size_t i = 0; i < levels.size(); ++i) {
    if (i == 10) {
      text += ", ... (" + std::to_string(levels.size()) + " levels)";
      break;
    }
    if (i > 0) text += ", ";
    text += Quote(levels[i].level);
  }
  return text;
}

void BuildCategorical(const TermSpec& spec, const std::string& key, const ColumnProfile& column,
                      std::size_t max_levels, PendingTerm& pending) {
  const std::string source_key = key + ".categorical";
  if (column.kind == ColumnKind::kEmpty) {
    throw PlanError(source_key, "column " + Quote(column.name) +
                                    " has no values (every cell is missing)");
  }
  if (column.too_many_levels || column.levels.empty()) {
    // The scan keeps a column's distinct texts only up to its level limit (the levels limit,
    // InputLimits::levels); past it the column kept none. Which rule stops the term: the plan's
    // max_levels when it is not above that limit, else the limit itself.
    const std::string what = column.kind == ColumnKind::kNumeric ? "distinct values" : "distinct levels";
    const std::string seen = "column " + Quote(column.name) + " has " +
                             (column.level_limit > 0
                                  ? "more than " + FormatCount(static_cast<std::int64_t>(column.level_limit)) + " "
                                  : std::string("too many ")) +
                             what;
    const std::string numeric_hint =
        column.kind == ColumnKind::kNumeric ? "; for a numeric term write \"column\" instead of \"categorical\"" : "";
    if (max_levels > column.level_limit && column.level_limit > 0) {
      throw LimitError(LimitKind::kLevels, column.level_limit, "plan key '" + source_key + "'",
                       seen + " (the scan keeps at most that many per column)",
                       "a column with that many levels is usually an identifier or needs grouping" + numeric_hint);
    }
    throw PlanError(source_key, seen + ", more than max_levels (" + std::to_string(max_levels) +
                                    "): too many for a categorical term; leave it out of the terms or group "
                                    "its levels" + numeric_hint);
  }
  if (column.levels.size() > max_levels) {
    throw PlanError(source_key, "column " + Quote(column.name) + " has " +
                                    std::to_string(column.levels.size()) +
                                    " levels, more than max_levels (" + std::to_string(max_levels) +
                                    "); if it really is a categorical term, raise \"max_levels\" in "
                                    "the plan, else leave it out of the terms");
  }
  std::vector<LevelCount> levels = column.levels;
  std::sort(levels.begin(), levels.end(),
            [](const LevelCount& a, const LevelCount& b) { return a.level < b.level; });
  if (levels.size() < 2) {
    throw PlanError(source_key, "column " + Quote(column.name) + " has only one level (" +
                                    Quote(levels.front().level) +
                                    "); a categorical term needs at least two");
  }
  std::string baseline;
  if (spec.baseline) {
    const bool found = std::any_of(levels.begin(), levels.end(), [&](const LevelCount& level) {
      return level.level == *spec.baseline;
    });
    if (!found) {
      throw PlanError(key + ".baseline", "baseline " + Quote(*spec.baseline) +
                                             " is not a level of column " + Quote(column.name) +
                                             " (levels: " + JoinLevels(levels) + ")");
    }
    baseline = *spec.baseline;
  } else {
    // Most frequent level (the most precise contrasts); ties go to the byte-wise smallest,
    // which is the first in sorted order because only a strictly larger count replaces it.
    const LevelCount* best = &levels.front();
    for (const auto& level : levels) {
      if (level.count > best->count) best = &level;
    }
    baseline = best->level;
  }
  pending.term.baseline = baseline;
  std::size_t offset = 0;
  for (const auto& level : levels) {
    if (level.level == baseline) {
      pending.level_index.emplace(level.level, kNoTerm);
      continue;
    }
    pending.level_index.emplace(level.level, offset++);
    pending.term.levels.push_back(level.level);
    pending.column_names.push_back(spec.name + "=" + level.level);
    pending.bounds.push_back(1.0);
  }
}

std::vector<TermSpec> AllTermsFromProfile(const DesignSpec& spec, const DataProfile& profile,
                                          const InputLimits& limits,
                                          std::vector<std::pair<std::string, std::string>>& skipped) {
  // Why each column cannot be a term (empty: it can), so that the terms are counted against the
  // limit before any is built.
  std::vector<std::string> why(profile.columns.size());
  std::uint64_t usable = 0;
  for (std::size_t c = 0; c < profile.columns.size(); ++c) {
    const ColumnProfile& column = profile.columns[c];
    if (column.name == spec.response || (spec.weights && column.name == *spec.weights)) {
      why[c] = "-";  // not a candidate, and not named among the skipped
    } else if (column.name == kInterceptName) {
      why[c] = "the name 'intercept' is reserved for the intercept column";
    } else if (auto reason = ReasonNotACandidateTerm(column, spec.max_levels)) {
      why[c] = std::move(*reason);
    } else {
      ++usable;
    }
  }
  if (usable > limits.terms) {
    throw LimitError(LimitKind::kTerms, limits.terms, "plan key 'terms'",
                     "\"all\" makes " + FormatCount(static_cast<std::int64_t>(usable)) +
                         " terms (the usable columns of " + QuotePath(profile.path) +
                         " besides the response" + (spec.weights ? " and the weights" : "") + ")",
                     "name the candidate terms in a plan instead");
  }
  std::vector<TermSpec> terms;
  terms.reserve(static_cast<std::size_t>(usable));
  for (std::size_t c = 0; c < profile.columns.size(); ++c) {
    const ColumnProfile& column = profile.columns[c];
    if (why[c] == "-") continue;
    if (!why[c].empty()) {
      skipped.emplace_back(column.name, std::move(why[c]));
      continue;
    }
    TermSpec term;
    term.name = column.name;
    term.column = column.name;
    term.kind = column.kind == ColumnKind::kNumeric ? TermKind::kNumeric : TermKind::kCategorical;
    term.key_path = "terms";
    terms.push_back(std::move(term));
  }
  if (terms.empty()) {
    throw PlanError("terms", "\"all\" found no usable column besides the response" +
                                 std::string(spec.weights ? " and the weights" : ""));
  }
  return terms;
}

}  // namespace

namespace {

using TermsByName = std::map<std::string, std::size_t, std::less<>>;

struct ResponseColumns {
  const ColumnProfile* response = nullptr;
  const ColumnProfile* weights = nullptr;  // null without weights
};

// The response and the weights come first: their errors are reported before any term's, and
// the response scale depends on the transform only.
ResponseColumns ResolveResponseAndWeights(const DesignSpec& spec, const DataProfile& profile,
                                          Design& design) {
  ResponseColumns found;
  const ColumnProfile& response = RequireColumn(profile, spec.response, "response");
  RequireNumeric(profile, response, "response", "response");
  if (spec.response_transform == ResponseTransform::kLog) {
    design.response_scale = ScaleForBound(LogBound(response));
  } else {
    design.response_scale = ScaleForBound(AbsoluteBound(response));
  }
  found.response = &response;
  if (spec.weights) {
    found.weights = &RequireColumn(profile, *spec.weights, "weights");
    RequireNumeric(profile, *found.weights, "weights", "weights");
  }
  return found;
}

// A product's columns pair every column of its first part with every column of its second;
// its parts are already built (evaluation order). First part's columns vary slowest.
void ExpandProduct(const TermSpec& term_spec, const TermsByName& by_name,
                   const std::vector<PendingTerm>& pending, PendingTerm& built) {
  const PendingTerm& first = pending[by_name.at(term_spec.parts[0])];
  const PendingTerm& second = pending[by_name.at(term_spec.parts[1])];
  built.term.parts = {by_name.at(term_spec.parts[0]), by_name.at(term_spec.parts[1])};
  for (std::size_t a = 0; a < first.column_names.size(); ++a) {
    for (std::size_t b = 0; b < second.column_names.size(); ++b) {
      built.column_names.push_back(first.column_names[a] + ":" + second.column_names[b]);
      built.bounds.push_back(first.bounds[a] * second.bounds[b]);
    }
  }
}

// A term read from one data column: the checks its kind needs of that column, then its design
// columns with the bounds that set their scales.
void ExpandSourceTerm(const DesignSpec& spec, const TermSpec& term_spec, const std::string& key,
                      const DataProfile& profile, PendingTerm& built) {
  DesignTerm& term = built.term;
  const std::string source_key = key + SourceKeySuffix(term_spec.kind);
  const ColumnProfile& column = RequireColumn(profile, term_spec.column, source_key);
  if (column.name == spec.response) {
    throw PlanError(source_key, "term " + Quote(term_spec.name) + " uses the response column " +
                                    Quote(column.name));
  }
  term.source_column = column.name;
  built.header_index = static_cast<std::ptrdiff_t>(column.index);
  switch (term_spec.kind) {
    case TermKind::kNumeric:
      if (column.kind == ColumnKind::kCategorical) {
        throw PlanError(source_key, "column " + Quote(column.name) + " is not numeric (" +
                                        FirstText(profile, column) +
                                        "); for a categorical term write \"categorical\": \"" +
                                        column.name + "\" instead of \"column\"");
      }
      RequireNumeric(profile, column, source_key, "column");
      built.column_names.push_back(term.name);
      built.bounds.push_back(AbsoluteBound(column));
      break;
    case TermKind::kPower: {
      RequireNumeric(profile, column, source_key, "column");
      built.column_names.push_back(term.name);
      built.bounds.push_back(static_cast<double>(
          std::pow(static_cast<long double>(AbsoluteBound(column)), term_spec.degree)));
      break;
    }
    case TermKind::kLog:
      RequireNumeric(profile, column, source_key, "column");
      built.column_names.push_back(term.name);
      built.bounds.push_back(LogBound(column));
      break;
    case TermKind::kCategorical:
      BuildCategorical(term_spec, key, column, spec.max_levels, built);
      break;
    case TermKind::kProduct:
      break;
  }
}

// a * b, or UINT64_MAX when that does not fit (a product of products of categorical terms).
std::uint64_t SaturatingProduct(std::uint64_t a, std::uint64_t b) {
  if (a != 0 && b > std::numeric_limits<std::uint64_t>::max() / a) return std::numeric_limits<std::uint64_t>::max();
  return a * b;
}

std::string CountText(std::uint64_t count) {
  return count > static_cast<std::uint64_t>(std::numeric_limits<std::int64_t>::max())
             ? std::to_string(count)
             : FormatCount(static_cast<std::int64_t>(count));
}

// The design columns counted against InputLimits::design_columns as the terms are expanded. A
// product's count is known from its parts before its columns are made, so an oversized product
// is refused before it allocates anything.
class DesignColumnBudget {
 public:
  DesignColumnBudget(const DesignSpec& spec, const InputLimits& limits)
      : limit_(limits.design_columns), total_(spec.intercept ? 1 : 0) {}

  void Add(const TermSpec& term, const std::string& key, std::uint64_t columns) {
    total_ = total_ > std::numeric_limits<std::uint64_t>::max() - columns ? std::numeric_limits<std::uint64_t>::max()
                                                                           : total_ + columns;
    largest_.emplace_back(columns, term.name);
    std::sort(largest_.begin(), largest_.end(), [](const auto& a, const auto& b) { return a.first > b.first; });
    if (largest_.size() > 3) largest_.pop_back();
    if (total_ <= limit_) return;
    std::string largest;
    for (const auto& [count, name] : largest_) {
      largest += (largest.empty() ? "" : ", ") + Quote(name) + " " + CountText(count);
    }
    throw LimitError(LimitKind::kDesignColumns, limit_, "plan key '" + key + "'",
                     "term " + Quote(term.name) + " makes " + CountText(columns) +
                         " design columns, which brings the design to " +
                         (total_ == std::numeric_limits<std::uint64_t>::max() ? std::string("more than 2^64")
                                                                               : CountText(total_)) +
                         " (the largest terms so far: " + largest + ")",
                     "leave out or narrow the largest terms (a product of two categorical terms has one "
                     "column per pair of non-baseline levels), or group levels");
  }

 private:
  std::uint64_t limit_;
  std::uint64_t total_;
  std::vector<std::pair<std::uint64_t, std::string>> largest_;  // at most 3, largest first
};

// Every term expanded into its design columns, in evaluation order (a product after its parts)
// so that errors come in that order too; the result is indexed in plan order.
std::vector<PendingTerm> ExpandTerms(const DesignSpec& spec, const std::vector<TermSpec>& specs,
                                     const TermsByName& by_name,
                                     const std::vector<std::size_t>& order,
                                     const DataProfile& profile, const InputLimits& limits) {
  std::vector<PendingTerm> pending(specs.size());
  DesignColumnBudget budget(spec, limits);
  for (std::size_t index : order) {
    const TermSpec& term_spec = specs[index];
    const std::string key = TermKey(term_spec, index);
    PendingTerm& built = pending[index];
    DesignTerm& term = built.term;
    term.name = term_spec.name;
    term.kind = term_spec.kind;
    term.key_path = key;
    term.degree = term_spec.kind == TermKind::kPower ? term_spec.degree : 1;
    if (term_spec.kind == TermKind::kProduct) {
      budget.Add(term_spec, key,
                 SaturatingProduct(pending[by_name.at(term_spec.parts[0])].column_names.size(),
                                   pending[by_name.at(term_spec.parts[1])].column_names.size()));
      ExpandProduct(term_spec, by_name, pending, built);
    } else {
      ExpandSourceTerm(spec, term_spec, key, profile, built);
      budget.Add(term_spec, key, built.column_names.size());
    }
  }
  return pending;
}

// Hierarchy parts of powers: the numeric term and the lower powers on the same column (in plan
// order). Terms are grouped by column first, so the cost is not quadratic in the terms.
void LinkPowerHierarchy(const std::vector<TermSpec>& specs, std::vector<PendingTerm>& pending) {
  std::map<std::string_view, std::vector<std::size_t>, std::less<>> by_column;
  for (std::size_t j = 0; j < specs.size(); ++j) {
    if (specs[j].kind == TermKind::kNumeric || specs[j].kind == TermKind::kPower) {
      by_column[specs[j].column].push_back(j);
    }
  }
  for (std::size_t i = 0; i < specs.size(); ++i) {
    if (specs[i].kind != TermKind::kPower) continue;
    for (const std::size_t j : by_column[specs[i].column]) {
      if (j == i) continue;
      if (specs[j].kind == TermKind::kNumeric ||
          (specs[j].kind == TermKind::kPower && specs[j].degree < specs[i].degree)) {
        pending[i].term.parts.push_back(j);
      }
    }
  }
}

// Lays the columns out in plan order (the intercept first) and refuses two design columns of
// the same name: a name must say which coefficient it is in every report and audit.
void LayOutColumns(const DesignSpec& spec, const std::vector<TermSpec>& specs,
                   std::vector<PendingTerm>& pending, Design& design) {
  std::map<std::string, std::size_t, std::less<>> column_owner;  // column name -> term (or kNoTerm)
  if (spec.intercept) {
    design.columns.push_back({kInterceptName, kNoTerm, 1.0});
    column_owner.emplace(kInterceptName, kNoTerm);
  }
  for (std::size_t i = 0; i < specs.size(); ++i) {
    DesignTerm& term = pending[i].term;
    term.first_column = design.columns.size();
    term.column_count = pending[i].column_names.size();
    for (std::size_t c = 0; c < term.column_count; ++c) {
      const std::string& name = pending[i].column_names[c];
      auto [owner, inserted] = column_owner.emplace(name, i);
      if (!inserted) {
        const std::string other = owner->second == kNoTerm ? std::string("the intercept")
                                                           : "term " + Quote(specs[owner->second].name);
        throw PlanError(term.key_path + ".name", "design column " + Quote(name) + " of term " +
                                                     Quote(term.name) +
                                                     " has the same name as a column of " + other);
      }
      design.columns.push_back({name, i, ScaleForBound(pending[i].bounds[c]), pending[i].bounds[c]});
    }
  }
}

// The cells Expand reads, in the order of the drop reasons, and the finished terms (moved out
// of `pending`).
void RecordSourceCells(const std::vector<TermSpec>& specs, const std::vector<std::size_t>& order,
                       const ResponseColumns& columns, std::vector<PendingTerm>& pending,
                       Design& design) {
  Design::Source& source = design.source;
  std::map<std::pair<std::ptrdiff_t, bool>, std::ptrdiff_t> cell_of;  // (header index, categorical) -> cell
  auto add_cell = [&](std::ptrdiff_t header_index, const std::string& name, bool categorical,
                      std::size_t term) -> std::ptrdiff_t {
    const auto [found, inserted] =
        cell_of.emplace(std::make_pair(header_index, categorical), static_cast<std::ptrdiff_t>(source.cells.size()));
    if (inserted) source.cells.push_back({header_index, name, categorical, term});
    return found->second;
  };
  source.response = static_cast<std::ptrdiff_t>(columns.response->index);
  source.response_cell = add_cell(source.response, columns.response->name, false, kNoTerm);
  if (columns.weights != nullptr) {
    source.weights = static_cast<std::ptrdiff_t>(columns.weights->index);
    source.weights_cell = add_cell(source.weights, columns.weights->name, false, kNoTerm);
  }
  for (std::size_t i = 0; i < specs.size(); ++i) {
    source.term_column.push_back(pending[i].header_index);
    source.level_index.push_back(std::move(pending[i].level_index));
    if (specs[i].kind == TermKind::kProduct) {
      source.term_cell.push_back(-1);
    } else {
      const bool categorical = specs[i].kind == TermKind::kCategorical;
      source.term_cell.push_back(add_cell(pending[i].header_index, pending[i].term.source_column,
                                          categorical, categorical ? i : kNoTerm));
    }
    design.terms.push_back(std::move(pending[i].term));
  }
  source.evaluation_order = order;
}

}  // namespace

Design BuildDesign(const DesignSpec& spec, const DataProfile& profile, const InputLimits& limits) {
  if (!spec.all_terms && spec.terms.size() > limits.terms) {
    throw LimitError(LimitKind::kTerms, limits.terms, "plan key 'terms'",
                     "the plan lists " + CountText(spec.terms.size()) + " terms");
  }
  ValidateDesignSpec(spec);
  Design design;
  design.response = spec.response;
  design.response_transform = spec.response_transform;
  design.intercept = spec.intercept;
  design.weights = spec.weights;
  design.source.file_name = profile.path.string();

  const ResponseColumns columns = ResolveResponseAndWeights(spec, profile, design);
  const std::vector<TermSpec> specs =
      spec.all_terms ? AllTermsFromProfile(spec, profile, limits, design.skipped) : spec.terms;
  TermsByName by_name;
  for (std::size_t i = 0; i < specs.size(); ++i) by_name.emplace(specs[i].name, i);
  const std::vector<std::size_t> order = EvaluationOrder(specs);

  std::vector<PendingTerm> pending = ExpandTerms(spec, specs, by_name, order, profile, limits);
  LinkPowerHierarchy(specs, pending);
  LayOutColumns(spec, specs, pending, design);
  RecordSourceCells(specs, order, columns, pending, design);
  design_detail::CheckMagnitudes(design, profile);
  return design;
}

}  // namespace stepledger

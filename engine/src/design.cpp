#include "stepledger/engine/design.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <functional>
#include <limits>
#include <set>
#include <string_view>
#include <utility>

#include "design_magnitude.h"
#include "design_quote.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"

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

constexpr const char* kInterceptName = "intercept";

using design_detail::Quote;
using design_detail::QuotePath;

std::string TermKey(const TermSpec& term, std::size_t index) {
  return term.key_path.empty() ? "terms[" + std::to_string(index) + "]" : term.key_path;
}

// Key (relative to the term) of the source column of each kind, as the plan file spells it.
std::string SourceKeySuffix(TermKind kind) {
  switch (kind) {
    case TermKind::kNumeric: return ".column";
    case TermKind::kPower: return ".power.column";
    case TermKind::kLog: return ".log";
    case TermKind::kCategorical: return ".categorical";
    case TermKind::kProduct: return ".product";
  }
  return "";
}

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
  return FormatLocation(profile.path.string(), location.line, location.column);
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
  if (column.too_many_levels) {
    throw PlanError(source_key, "column " + Quote(column.name) + " has more than " +
                                    std::to_string(column.levels.size()) +
                                    " distinct levels, too many for a categorical term");
  }
  if (column.levels.empty()) {
    // The profile keeps the distinct texts of a numeric column only up to its level limit.
    throw PlanError(source_key, "column " + Quote(column.name) +
                                    " has too many distinct values for a categorical term "
                                    "(use \"column\" for a numeric term)");
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
                                          std::vector<std::pair<std::string, std::string>>& skipped) {
  std::vector<TermSpec> terms;
  for (const auto& column : profile.columns) {
    if (column.name == spec.response || (spec.weights && column.name == *spec.weights)) continue;
    std::string why;
    if (column.name == kInterceptName) {
      why = "the name 'intercept' is reserved for the intercept column";
    } else if (auto reason = ReasonNotACandidateTerm(column, spec.max_levels)) {
      why = std::move(*reason);
    }
    if (!why.empty()) {
      skipped.emplace_back(column.name, why);
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

// Plan order with every product after its parts (depth-first; ValidateDesignSpec has
// already refused cycles).
std::vector<std::size_t> EvaluationOrder(const std::vector<TermSpec>& terms) {
  std::map<std::string, std::size_t, std::less<>> by_name;
  for (std::size_t i = 0; i < terms.size(); ++i) by_name.emplace(terms[i].name, i);
  std::vector<std::size_t> order;
  std::vector<bool> placed(terms.size(), false);
  std::function<void(std::size_t)> place = [&](std::size_t index) {
    if (placed[index]) return;
    placed[index] = true;
    if (terms[index].kind == TermKind::kProduct) {
      for (const auto& part : terms[index].parts) place(by_name.at(part));
    }
    order.push_back(index);
  };
  for (std::size_t i = 0; i < terms.size(); ++i) place(i);
  return order;
}

}  // namespace

void ValidateDesignSpec(const DesignSpec& spec) {
  if (spec.response.empty()) {
    throw PlanError("response", "expected a column name, found an empty string");
  }
  if (spec.weights && spec.weights->empty()) {
    throw PlanError("weights", "expected a column name, found an empty string");
  }
  if (spec.max_levels < 2) {
    throw PlanError("max_levels", "expected an integer >= 2, found " + std::to_string(spec.max_levels));
  }
  if (spec.all_terms) return;
  if (spec.terms.empty()) throw PlanError("terms", "expected at least one term, found none");

  std::map<std::string, std::size_t, std::less<>> by_name;
  for (std::size_t i = 0; i < spec.terms.size(); ++i) {
    const TermSpec& term = spec.terms[i];
    const std::string key = TermKey(term, i);
    if (term.name.empty()) throw PlanError(key + ".name", "expected a non-empty term name");
    if (term.name == kInterceptName) {
      throw PlanError(key + ".name", "the name 'intercept' is reserved for the intercept column");
    }
    auto [existing, inserted] = by_name.emplace(term.name, i);
    if (!inserted) {
      throw PlanError(key + ".name", "duplicate term name " + Quote(term.name) + ", also " +
                                         TermKey(spec.terms[existing->second], existing->second) +
                                         ".name");
    }
    if (term.kind != TermKind::kProduct && term.column.empty()) {
      throw PlanError(key + SourceKeySuffix(term.kind), "expected a column name, found an empty string");
    }
    if (term.kind == TermKind::kPower && term.degree < 2) {
      throw PlanError(key + ".power.degree",
                      "expected an integer >= 2, found " + std::to_string(term.degree));
    }
    if (term.kind != TermKind::kCategorical && term.baseline) {
      throw PlanError(key + ".baseline", "a baseline belongs to a categorical term only");
    }
  }
  for (std::size_t i = 0; i < spec.terms.size(); ++i) {
    const TermSpec& term = spec.terms[i];
    if (term.kind != TermKind::kProduct) continue;
    const std::string key = TermKey(term, i);
    if (term.parts.size() != 2) {
      throw PlanError(key + ".product", "expected two term names, found " +
                                            std::to_string(term.parts.size()));
    }
    for (std::size_t p = 0; p < 2; ++p) {
      if (!by_name.contains(term.parts[p])) {
        throw PlanError(key + ".product[" + std::to_string(p) + "]",
                        "no term named " + Quote(term.parts[p]) + " in the plan");
      }
    }
    if (term.parts[0] == term.parts[1]) {
      throw PlanError(key + ".product", "a product of term " + Quote(term.parts[0]) +
                                            " with itself; use a power term for a square");
    }
  }
  // Cycles among products: depth-first search with colours.
  std::vector<int> state(spec.terms.size(), 0);  // 0 new, 1 on the path, 2 done
  std::vector<std::size_t> path;
  std::function<void(std::size_t)> visit = [&](std::size_t index) {
    state[index] = 1;
    path.push_back(index);
    const TermSpec& term = spec.terms[index];
    if (term.kind == TermKind::kProduct) {
      for (const auto& part : term.parts) {
        const std::size_t next = by_name.at(part);
        if (state[next] == 1) {
          std::string route;
          auto start = std::find(path.begin(), path.end(), next);
          for (auto it = start; it != path.end(); ++it) route += Quote(spec.terms[*it].name) + " -> ";
          route += Quote(spec.terms[next].name);
          throw PlanError(TermKey(spec.terms[next], next) + ".product",
                          "products form a cycle: " + route);
        }
        if (state[next] == 0) visit(next);
      }
    }
    path.pop_back();
    state[index] = 2;
  };
  for (std::size_t i = 0; i < spec.terms.size(); ++i) {
    if (state[i] == 0) visit(i);
  }
}

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

// Every term expanded into its design columns, in evaluation order (a product after its parts)
// so that errors come in that order too; the result is indexed in plan order.
std::vector<PendingTerm> ExpandTerms(const DesignSpec& spec, const std::vector<TermSpec>& specs,
                                     const TermsByName& by_name,
                                     const std::vector<std::size_t>& order,
                                     const DataProfile& profile) {
  std::vector<PendingTerm> pending(specs.size());
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
      ExpandProduct(term_spec, by_name, pending, built);
    } else {
      ExpandSourceTerm(spec, term_spec, key, profile, built);
    }
  }
  return pending;
}

// Hierarchy parts of powers: the numeric term and the lower powers on the same column.
void LinkPowerHierarchy(const std::vector<TermSpec>& specs, std::vector<PendingTerm>& pending) {
  for (std::size_t i = 0; i < specs.size(); ++i) {
    if (specs[i].kind != TermKind::kPower) continue;
    for (std::size_t j = 0; j < specs.size(); ++j) {
      if (j == i || specs[j].column != specs[i].column) continue;
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
  auto add_cell = [&](std::ptrdiff_t header_index, const std::string& name, bool categorical,
                      std::size_t term) -> std::ptrdiff_t {
    for (std::size_t c = 0; c < source.cells.size(); ++c) {
      if (source.cells[c].header_index == header_index && source.cells[c].categorical == categorical) {
        return static_cast<std::ptrdiff_t>(c);
      }
    }
    source.cells.push_back({header_index, name, categorical, term});
    return static_cast<std::ptrdiff_t>(source.cells.size() - 1);
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

Design BuildDesign(const DesignSpec& spec, const DataProfile& profile) {
  ValidateDesignSpec(spec);
  Design design;
  design.response = spec.response;
  design.response_transform = spec.response_transform;
  design.intercept = spec.intercept;
  design.weights = spec.weights;
  design.source.file_name = profile.path.string();

  const ResponseColumns columns = ResolveResponseAndWeights(spec, profile, design);
  const std::vector<TermSpec> specs =
      spec.all_terms ? AllTermsFromProfile(spec, profile, design.skipped) : spec.terms;
  TermsByName by_name;
  for (std::size_t i = 0; i < specs.size(); ++i) by_name.emplace(specs[i].name, i);
  const std::vector<std::size_t> order = EvaluationOrder(specs);

  std::vector<PendingTerm> pending = ExpandTerms(spec, specs, by_name, order, profile);
  LinkPowerHierarchy(specs, pending);
  LayOutColumns(spec, specs, pending, design);
  RecordSourceCells(specs, order, columns, pending, design);
  design_detail::CheckMagnitudes(design, profile);
  return design;
}

}  // namespace stepledger

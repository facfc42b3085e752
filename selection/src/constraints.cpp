// Constraints of a search: keep, never (applied when the context is built), hierarchy,
// max_terms and aliasing. Each check returns the reason in words, for the candidate table.

#include <algorithm>

#include "search_internal.h"

namespace stepledger::selection_detail {

std::string SearchContext::AliasReason(const Design& design, const GroupScore& score,
                                       double tolerance) {
  std::string columns;
  for (std::size_t column : score.aliased_columns) {
    if (!columns.empty()) columns += ", ";
    columns += "'" + (column < design.columns.size() ? design.columns[column].name : std::to_string(column)) + "'";
  }
  if (columns.empty()) columns = "a column";
  return "column " + columns + " has relative norm " + Num(score.min_relative_norm) +
         " after projection on the model, below alias_tolerance " + Threshold(tolerance);
}

bool SearchContext::AtMaxTerms() const {
  return options_.max_terms && model_terms_.size() >= *options_.max_terms;
}

bool SearchContext::AboveMaxTerms() const {
  return options_.max_terms && model_terms_.size() > *options_.max_terms;
}

std::string SearchContext::AddBlockedReason(std::size_t term) const {
  if (options_.hierarchy) {
    std::string missing;
    for (std::size_t part : design_.terms[term].parts) {
      if (in_model_[part]) continue;
      if (!missing.empty()) missing += ", ";
      missing += "'" + term_name(part) + "'";
    }
    if (!missing.empty()) return "hierarchy: needs " + missing + " in the model first";
  }
  if (AtMaxTerms()) return "max_terms: the model has " + std::to_string(*options_.max_terms) + " terms";
  return {};
}

std::string SearchContext::RemoveBlockedReason(std::size_t term) const {
  if (keep_flag_[term]) return "keep: a kept term never leaves";
  if (options_.hierarchy) {
    std::string dependants;
    for (std::size_t other : model_terms_) {
      const auto& parts = design_.terms[other].parts;
      if (std::find(parts.begin(), parts.end(), term) == parts.end()) continue;
      if (!dependants.empty()) dependants += ", ";
      dependants += "'" + term_name(other) + "'";
    }
    if (!dependants.empty()) return "hierarchy: " + dependants + " built on it must leave first";
  }
  return {};
}

bool SearchContext::SatisfiesHierarchy(const std::vector<char>& in_set) const {
  if (!options_.hierarchy) return true;
  for (std::size_t term = 0; term < in_set.size(); ++term) {
    if (!in_set[term] || keep_flag_[term]) continue;
    for (std::size_t part : design_.terms[term].parts) {
      if (!in_set[part]) return false;
    }
  }
  return true;
}

}  // namespace stepledger::selection_detail

// The checks of a plan's design part that need no data (ValidateDesignSpec), and the plan order
// in which terms are built (a product after its parts). Walks over the terms use explicit
// stacks and no step is quadratic in the terms, so that a plan as large as the terms limit
// allows (engine/limits.h) stays fast and cannot exhaust the call stack.

#include <algorithm>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "design_quote.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/errors.h"

namespace stepledger {
namespace design_detail {

// Plan order with every product after its parts (depth-first; ValidateDesignSpec has
// already refused cycles). An explicit stack, so that a long chain of products cannot exhaust
// the call stack.
std::vector<std::size_t> EvaluationOrder(const std::vector<TermSpec>& terms) {
  std::map<std::string, std::size_t, std::less<>> by_name;
  for (std::size_t i = 0; i < terms.size(); ++i) by_name.emplace(terms[i].name, i);
  std::vector<std::size_t> order;
  order.reserve(terms.size());
  std::vector<bool> placed(terms.size(), false);
  std::vector<std::pair<std::size_t, std::size_t>> stack;  // term, parts looked at
  for (std::size_t i = 0; i < terms.size(); ++i) {
    if (placed[i]) continue;
    placed[i] = true;
    stack.emplace_back(i, 0);
    while (!stack.empty()) {
      const std::size_t index = stack.back().first;
      const TermSpec& term = terms[index];
      if (term.kind == TermKind::kProduct && stack.back().second < term.parts.size()) {
        const std::size_t part = by_name.at(term.parts[stack.back().second++]);
        if (!placed[part]) {
          placed[part] = true;
          stack.emplace_back(part, 0);
        }
        continue;
      }
      order.push_back(index);
      stack.pop_back();
    }
  }
  return order;
}

}  // namespace design_detail

using design_detail::kInterceptName;
using design_detail::Quote;
using design_detail::SourceKeySuffix;
using design_detail::TermKey;

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
    if (term.kind == TermKind::kPower && (term.degree < 2 || term.degree > kMaxPowerDegree)) {
      throw PlanError(key + ".power.degree", "expected an integer from 2 to " + std::to_string(kMaxPowerDegree) +
                                                 ", found " + std::to_string(term.degree));
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
  // Cycles among products: depth-first search with colours, on an explicit stack (a chain of
  // products as long as the terms limit allows must not exhaust the call stack).
  std::vector<int> state(spec.terms.size(), 0);  // 0 new, 1 on the path, 2 done
  std::vector<std::pair<std::size_t, std::size_t>> path;  // term, parts looked at
  for (std::size_t i = 0; i < spec.terms.size(); ++i) {
    if (state[i] != 0) continue;
    state[i] = 1;
    path.emplace_back(i, 0);
    while (!path.empty()) {
      const std::size_t index = path.back().first;
      const TermSpec& term = spec.terms[index];
      if (term.kind == TermKind::kProduct && path.back().second < term.parts.size()) {
        const std::size_t next = by_name.at(term.parts[path.back().second++]);
        if (state[next] == 1) {
          // The cycle's terms in order, the middle of a long one left out (one line on stderr).
          const auto start = std::find_if(path.begin(), path.end(), [next](const auto& frame) { return frame.first == next; });
          const std::size_t length = static_cast<std::size_t>(path.end() - start);
          std::string route;
          for (std::size_t step = 0; step < length; ++step) {
            if (length > 12 && step == 6) {
              route += "... (" + std::to_string(length - 9) + " more) -> ";
              step = length - 4;
              continue;
            }
            route += Quote(spec.terms[(start + static_cast<std::ptrdiff_t>(step))->first].name) + " -> ";
          }
          route += Quote(spec.terms[next].name);
          throw PlanError(TermKey(spec.terms[next], next) + ".product", "products form a cycle: " + route);
        }
        if (state[next] == 0) {
          state[next] = 1;
          path.emplace_back(next, 0);
        }
        continue;
      }
      state[index] = 2;
      path.pop_back();
    }
  }
}

}  // namespace stepledger

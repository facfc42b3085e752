#pragma once
// A test-only, independent implementation of the greedy searches: every candidate model is
// refitted from the rows with plain least squares (LAPACK dgels through Armadillo's solve with
// solve_opts::no_approx, return checked), and the criteria are computed here from DESIGN.md's
// formulas, not through the engine. The kernel-based search must take the same route.
//
// Rules mirrored from selection/search.h: ranking by the criterion (partial-f: by p, then F),
// ties within a relative 1e-12 broken by plan order, a move taken only on strict improvement,
// stepwise re-testing every term after each addition, and a stop on a model met before.
// Supported constraints: keep, never, max_terms, hierarchy. Not supported: aliased terms.

#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "stepledger/selection/observer.h"
#include "stepledger/selection/plan.h"
#include "stepledger/selection/search.h"
#include "support/selection_fixtures.h"

namespace stepledger::testing {

struct OracleMove {
  MoveAction action = MoveAction::kAdd;
  std::string term;
};

struct OracleRoute {
  std::vector<OracleMove> moves;
  std::vector<std::string> final_terms;  ///< plan order
};

/// RSS of intercept (when the design has one) + the terms, refitted from the rows.
double OracleRss(const DenseProblem& problem, const std::vector<std::size_t>& terms);

/// forward, backward or stepwise by refitting.
OracleRoute OracleSearch(const DenseProblem& problem, const SearchOptions& options);

/// A criterion the test computes itself from the model's terms (the intercept implied when the
/// design has one): lower is better, nullopt when undefined. Used instead of the criterion
/// formulas (e.g. for cv, a per-fold refit from the rows).
using OracleScore = std::function<std::optional<double>(const std::vector<std::size_t>& terms)>;
/// forward, backward or stepwise by the given score (not partial-f).
OracleRoute OracleSearch(const DenseProblem& problem, const SearchOptions& options, OracleScore score);

/// The route of a kernel search in the same form.
OracleRoute RouteOf(const SearchResult& result, const Design& design);

/// gtest assertion helper: same moves in the same order, same final terms.
void ExpectSameRoute(const OracleRoute& expected, const OracleRoute& actual, const std::string& label);

}  // namespace stepledger::testing

// Links the installed libraries and runs a selection through the public API on an in-memory
// factor: y = 1 + 2 x1 + small noise, with x2 unrelated. Exit 0 when forward selection by BIC
// picks x1 alone.
#include <cmath>
#include <iostream>
#include <vector>

#include "stepledger/audit/canonical_json.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/selection/search.h"

int main() {
  using namespace stepledger;
  Design design;
  design.response = "y";
  design.intercept = true;
  design.columns = {{"intercept", kNoTerm, 1.0}, {"x1", 0, 1.0}, {"x2", 1, 1.0}};
  design.terms = {{"x1", TermKind::kNumeric, 1, 1, {}, "x1"}, {"x2", TermKind::kNumeric, 2, 1, {}, "x2"}};
  FactorBuilder builder({1.0, 1.0, 1.0, 1.0});
  for (int row = 0; row < 200; ++row) {
    const double x1 = std::sin(row * 0.37), x2 = std::cos(row * 1.91);
    const double noise = 0.01 * std::sin(row * 7.3 + 1.0);
    const std::vector<double> x{1.0, x1, x2};
    builder.AddRow(x, 1 + 2 * x1 + noise, 1.0);
  }
  const Factor factor = builder.Finish();
  SearchOptions options;
  options.method = Method::kForward;
  options.criterion = Criterion::kBic;
  const SearchResult result = RunSearch(factor, design, options);
  std::cout << result.BriefReport() << "\n" << CanonicalJson({{"terms", result.final_terms}}) << "\n";
  return result.final_terms == std::vector<std::string>{"x1"} ? 0 : 1;
}

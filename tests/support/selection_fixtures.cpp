#include "support/selection_fixtures.h"

#include <cmath>
#include <fstream>
#include <random>
#include <sstream>
#include <stdexcept>

#include "support/test_paths.h"

namespace stepledger::testing {

Design MakeDenseDesign(const std::vector<DenseTermSpec>& terms, bool intercept) {
  Design design;
  design.response = "y";
  design.intercept = intercept;
  if (intercept) design.columns.push_back({"intercept", kNoTerm, 1.0});
  for (std::size_t index = 0; index < terms.size(); ++index) {
    DesignTerm term;
    term.name = terms[index].name;
    term.kind = terms[index].kind;
    term.first_column = design.columns.size();
    term.column_count = terms[index].column_count;
    term.key_path = "terms[" + std::to_string(index) + "]";
    for (const auto& part : terms[index].parts) {
      const std::size_t part_index = design.FindTerm(part);
      if (part_index == kNoTerm) throw std::invalid_argument("MakeDenseDesign: unknown part " + part);
      term.parts.push_back(part_index);
    }
    for (std::size_t column = 0; column < term.column_count; ++column) {
      const std::string name =
          term.column_count == 1 ? term.name : term.name + "[" + std::to_string(column + 1) + "]";
      design.columns.push_back({name, index, 1.0});
    }
    design.terms.push_back(std::move(term));
  }
  return design;
}

Factor FactorFromRows(const arma::mat& x, const arma::vec& y, const Design& design,
                      std::size_t block_rows) {
  if (x.n_cols != design.column_count()) throw std::invalid_argument("FactorFromRows: width");
  FactorBuilder builder(design.scales(), block_rows);
  std::vector<double> row(x.n_cols);
  for (arma::uword i = 0; i < x.n_rows; ++i) {
    for (arma::uword j = 0; j < x.n_cols; ++j) row[j] = x(i, j);
    builder.AddRow(row, y(i), 1.0);
  }
  return builder.Finish();
}

DenseProblem MakeDenseProblem(const arma::mat& predictors, const arma::vec& y,
                              const std::vector<DenseTermSpec>& terms, bool intercept) {
  DenseProblem problem;
  problem.design = MakeDenseDesign(terms, intercept);
  problem.x = intercept ? arma::join_rows(arma::ones<arma::vec>(predictors.n_rows), predictors)
                        : predictors;
  problem.y = y;
  problem.factor = FactorFromRows(problem.x, problem.y, problem.design);
  return problem;
}

DenseProblem LoadHald() {
  const std::filesystem::path path = ReferenceDir() / "hald-cement" / "hald.csv";
  std::ifstream in(path);
  if (!in) throw std::runtime_error("Hald cement data '" + path.string() + "' cannot be read");
  std::string line;
  std::getline(in, line);  // header x1,x2,x3,x4,y
  std::vector<std::vector<double>> rows;
  while (std::getline(in, line)) {
    if (line.empty() || line == "\r") continue;
    std::vector<double> values;
    std::stringstream cells(line);
    std::string cell;
    while (std::getline(cells, cell, ',')) values.push_back(std::stod(cell));
    if (values.size() != 5) throw std::runtime_error("hald.csv: a row without 5 values");
    rows.push_back(values);
  }
  arma::mat predictors(rows.size(), 4);
  arma::vec y(rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    for (std::size_t j = 0; j < 4; ++j) predictors(i, j) = rows[i][j];
    y(i) = rows[i][4];
  }
  return MakeDenseProblem(predictors, y, {{"x1"}, {"x2"}, {"x3"}, {"x4"}});
}

namespace {

/// Standard normal deviates from a 64-bit Mersenne twister by Box-Muller (the library's
/// normal_distribution is not the same on every platform; this is).
class Normal {
 public:
  explicit Normal(std::uint64_t seed) : engine_(seed) {}
  double operator()() {
    if (has_spare_) { has_spare_ = false; return spare_; }
    double u1 = 0;
    do { u1 = Uniform(); } while (u1 <= 0);
    const double u2 = Uniform();
    const double radius = std::sqrt(-2.0 * std::log(u1));
    spare_ = radius * std::sin(2.0 * M_PI * u2);
    has_spare_ = true;
    return radius * std::cos(2.0 * M_PI * u2);
  }
  double Uniform() { return static_cast<double>(engine_() >> 11) * 0x1.0p-53; }
  std::uint64_t Integer(std::uint64_t bound) { return engine_() % bound; }

 private:
  std::mt19937_64 engine_;
  bool has_spare_ = false;
  double spare_ = 0;
};

}  // namespace

DenseProblem MakeRandomProblem(const RandomProblemOptions& options) {
  Normal normal(options.seed);
  const std::size_t n = options.n;
  const std::size_t m = options.numeric_terms;
  const std::size_t levels = options.categorical_levels;
  const std::size_t width = m + (levels > 1 ? levels - 1 : 0);
  arma::mat predictors(n, width, arma::fill::zeros);
  arma::vec y(n, arma::fill::zeros);
  const double rho = options.correlation;
  const double innovation = std::sqrt(1 - rho * rho);
  // Different scales and centres per column, so that the scaling of the factor matters.
  std::vector<double> scale(m), centre(m);
  for (std::size_t j = 0; j < m; ++j) {
    scale[j] = std::pow(10.0, static_cast<double>(j % 5) - 2.0);
    centre[j] = static_cast<double>(j % 3) * 7.0;
  }
  std::vector<double> beta(m, 0.0);
  for (std::size_t j = 0; j < std::min(options.true_terms, m); ++j) {
    // Distinct sizes and alternating signs: a well-defined route.
    beta[j] = options.effect * (1.0 + 0.35 * static_cast<double>(j)) * (j % 2 == 0 ? 1.0 : -1.0);
  }
  for (std::size_t i = 0; i < n; ++i) {
    double previous = normal();
    double signal = 0;
    for (std::size_t j = 0; j < m; ++j) {
      const double standard = j == 0 ? previous : rho * previous + innovation * normal();
      previous = standard;
      predictors(i, j) = centre[j] + scale[j] * standard;
      signal += beta[j] * standard;
    }
    if (levels > 1) {
      const std::size_t level = static_cast<std::size_t>(normal.Integer(levels));
      if (level > 0) predictors(i, m + level - 1) = 1.0;
      if (options.categorical_true) signal += options.effect * 1.5 * static_cast<double>(level);
    }
    y(i) = 3.0 + signal + normal();
  }
  std::vector<DenseTermSpec> terms;
  for (std::size_t j = 0; j < m; ++j) terms.push_back({"x" + std::to_string(j + 1)});
  if (levels > 1) terms.push_back({"grade", levels - 1, {}, TermKind::kCategorical});
  DenseProblem problem = MakeDenseProblem(predictors, y, terms);
  for (std::size_t j = 0; j < std::min(options.true_terms, m); ++j) problem.true_terms.push_back("x" + std::to_string(j + 1));
  if (levels > 1 && options.categorical_true) problem.true_terms.push_back("grade");
  return problem;
}

}  // namespace stepledger::testing

// The fit's reports for people (BriefReport, FullReport): kept apart from the fit itself so
// that the numerics in fit.cpp read without the text layout.
#include "stepledger/engine/fit.h"

#include <algorithm>
#include <cstdint>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

// ---- text layout ---------------------------------------------------------------------------

// People read these reports: every number through the one policy (engine/number_format.h).
std::string Number(const std::optional<double>& value, int digits = 6) {
  return FormatQuantity(value, digits);
}
std::string PValue(const std::optional<double>& p) { return FormatPValue(p); }

// Columns of text: the first `left_columns` left-aligned (names), the rest right-aligned.
std::string Layout(const std::vector<std::vector<std::string>>& rows, std::size_t left_columns,
                   const std::string& indent = "  ") {
  std::vector<std::size_t> widths;
  for (const auto& row : rows) {
    widths.resize(std::max(widths.size(), row.size()));
    for (std::size_t c = 0; c < row.size(); ++c) widths[c] = std::max(widths[c], row[c].size());
  }
  std::ostringstream text;
  for (const auto& row : rows) {
    std::string line = indent;
    for (std::size_t c = 0; c < row.size(); ++c) {
      if (c > 0) line += "  ";
      const std::string padding(widths[c] - row[c].size(), ' ');
      line += c < left_columns ? row[c] + padding : padding + row[c];
    }
    while (!line.empty() && line.back() == ' ') line.pop_back();
    text << line << '\n';
  }
  return text.str();
}

}  // namespace

std::string FitResult::BriefReport() const {
  std::ostringstream text;
  text << "explained by: " << (intercept ? "intercept" : "no intercept");
  for (const std::string& term : terms) text << ", " << term;
  text << '\n'
       << "  " << n << " rows, " << k << " coefficients, status " << ToString(status) << '\n'
       << "  R-squared " << Number(criteria.r2) << ", adjusted " << Number(criteria.adj_r2)
       << ", residual SD " << Number(criteria.sigma) << '\n'
       << "  AIC " << Number(criteria.aic, 8) << ", BIC " << Number(criteria.bic, 8) << '\n';
  return text.str();
}

std::string FitResult::FullReport() const {
  std::ostringstream text;
  text << "Fitted model (" << ToString(status) << ")\n";
  // The terms in model order (the command line states the model with its response's name).
  text << "  terms: " << (intercept ? "intercept" : "no intercept");
  for (const std::string& term : terms) text << ", " << term;
  text << "\n  rows used " << n << ", coefficients " << k << ", residual df " << Number(df_residual)
       << '\n';
  if (!aliased_columns.empty()) {
    text << "  left out as aliased (relative residual norm below " << Number(alias_tolerance, 3)
         << "):";
    for (const std::string& name : aliased_columns) text << ' ' << name;
    text << '\n';
  }
  if (status == FitStatus::kNoResidualDf) {
    text << "  no residual degrees of freedom: standard errors, t and p are undefined\n";
  }

  const std::string level = Number(100 * confidence_level, 4) + "%";
  text << "\nCoefficients\n";
  std::vector<std::vector<std::string>> table = {
      {"column", "term", "estimate", "std error", "t", "p", level + " low", level + " high", "VIF"}};
  for (const CoefficientEstimate& c : coefficients) {
    table.push_back({c.name, c.term, Number(c.estimate, 8), Number(c.se), FormatStatistic(c.t),
                     PValue(c.p), Number(c.ci_low), Number(c.ci_high),
                     c.vif ? Number(c.vif, 4) : (c.term == "intercept" ? "-" : "undefined")});
  }
  text << Layout(table, 2);

  text << "\nAnalysis of variance (term rows: sequential sums of squares in model order)\n";
  std::vector<std::vector<std::string>> anova_table = {{"source", "df", "sum of squares", "mean square", "F", "p"}};
  for (const AnovaRow& row : anova) {
    // The residual and total rows have no F test (and the total no mean square): left blank,
    // which is not the same as "undefined" (a test that exists but has no value).
    const bool residual_or_total = row.source == "residual" || row.source == "total";
    anova_table.push_back({row.source, Number(row.df), Number(row.ss, 8),
                           row.source == "total" ? "" : Number(row.ms, 8),
                           residual_or_total ? "" : FormatStatistic(row.f),
                           residual_or_total ? "" : PValue(row.p)});
  }
  text << Layout(anova_table, 1);

  text << "\nFit statistics\n";
  std::vector<std::vector<std::string>> statistics = {
      {"R-squared", Number(criteria.r2, 8)},
      {"adjusted R-squared", Number(criteria.adj_r2, 8)},
      {"residual SD", Number(criteria.sigma, 8)},
      {"overall F test", FormatFTest(f, static_cast<std::int64_t>(intercept ? k - 1 : k),
                                     static_cast<std::int64_t>(df_residual), f_p)},
      {"log-likelihood", Number(criteria.log_likelihood, 10)},
      {"AIC", Number(criteria.aic, 10)},
      {"AICc", Number(criteria.aicc, 10)},
      {"BIC", Number(criteria.bic, 10)},
      {"Mallows' Cp", Number(criteria.cp, 8)},
      {"reciprocal condition of R11", Number(rcond, 3)},
      {"refinement", std::to_string(refinement_passes) + (refinement_passes == 1 ? " pass" : " passes") +
                         ", last relative correction " + Number(refinement_correction, 3) +
                         ", stopped: " + ToString(refinement_stop)}};
  text << Layout(statistics, 2);
  return text.str();
}

}  // namespace stepledger

#include "support/refit_oracle.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <set>
#include <stdexcept>

#include <boost/math/distributions/fisher_f.hpp>
#include <gtest/gtest.h>

namespace stepledger::testing {
namespace {

std::vector<arma::uword> ColumnsOf(const DenseProblem& problem, const std::vector<std::size_t>& terms) {
  std::vector<arma::uword> columns;
  if (problem.design.intercept) columns.push_back(0);
  for (std::size_t term : terms) {
    const auto& spec = problem.design.terms[term];
    for (std::size_t c = 0; c < spec.column_count; ++c) columns.push_back(spec.first_column + c);
  }
  return columns;
}

bool Tie(double a, double b) {
  if (a == b) return true;
  if (!std::isfinite(a) || !std::isfinite(b)) return false;
  return std::fabs(a - b) <= 1e-12 * std::max(std::fabs(a), std::fabs(b));
}

struct Candidate {
  std::size_t term = 0;
  bool eligible = false;
  double score = 0;      // internal, lower is better
  double f = 0, p = 1;
};

class Oracle {
 public:
  Oracle(const DenseProblem& problem, const SearchOptions& options, OracleScore score = {})
      : problem_(problem), options_(options), score_(std::move(score)),
        n_(static_cast<double>(problem.y.n_elem)) {
    const double mean = problem.design.intercept ? arma::mean(problem.y) : 0.0;
    tss_ = arma::accu(arma::square(problem.y - mean));
    for (std::size_t term = 0; term < problem.design.terms.size(); ++term) {
      const auto& name = problem.design.terms[term].name;
      const bool kept = std::find(options.keep.begin(), options.keep.end(), name) != options.keep.end();
      const bool never = std::find(options.never.begin(), options.never.end(), name) != options.never.end();
      if (kept) keep_.push_back(term);
      else if (!never) candidates_.push_back(term);
    }
    std::vector<std::size_t> full = keep_;
    full.insert(full.end(), candidates_.begin(), candidates_.end());
    const double k_full = K(full);
    const double rss_full = OracleRss(problem, full);
    if (n_ > k_full && rss_full > 0) sigma2_full_ = rss_full / (n_ - k_full);
  }

  OracleRoute Run() {
    std::vector<std::size_t> model = keep_;
    if (options_.method == Method::kBackward) model.insert(model.end(), candidates_.begin(), candidates_.end());
    std::set<std::vector<std::size_t>> seen{Sorted(model)};
    OracleRoute route;
    auto apply = [&](MoveAction action, std::size_t term) {
      if (action == MoveAction::kAdd) model.push_back(term);
      else model.erase(std::find(model.begin(), model.end(), term));
      route.moves.push_back({action, problem_.design.terms[term].name});
    };
    if (options_.method == Method::kBackward) {
      while (true) {
        auto choice = Choose(model, MoveAction::kRemove);
        const bool forced = options_.max_terms && model.size() > *options_.max_terms;
        if (!choice || (!forced && !TakeRemove(model, *choice))) break;
        apply(MoveAction::kRemove, choice->term);
      }
    } else {
      const bool stepwise = options_.method == Method::kStepwise;
      while (true) {
        if (options_.max_terms && model.size() >= *options_.max_terms) break;
        auto add = Choose(model, MoveAction::kAdd);
        if (!add || !TakeAdd(model, *add)) break;
        if (stepwise) {
          auto key = Sorted(model);
          key.push_back(add->term);
          std::sort(key.begin(), key.end());
          if (!seen.insert(key).second) break;
        }
        apply(MoveAction::kAdd, add->term);
        if (!stepwise) continue;
        bool cycled = false;
        while (true) {
          auto remove = Choose(model, MoveAction::kRemove);
          if (!remove || !TakeRemove(model, *remove)) break;
          auto key = Sorted(model);
          key.erase(std::find(key.begin(), key.end(), remove->term));
          if (!seen.insert(key).second) { cycled = true; break; }
          apply(MoveAction::kRemove, remove->term);
        }
        if (cycled) break;
      }
    }
    route.final_terms = NamesInPlanOrder(model);
    return route;
  }

 private:
  double K(const std::vector<std::size_t>& terms) const {
    return static_cast<double>(ColumnsOf(problem_, terms).size());
  }

  static std::vector<std::size_t> Sorted(std::vector<std::size_t> terms) {
    std::sort(terms.begin(), terms.end());
    return terms;
  }

  std::vector<std::string> NamesInPlanOrder(const std::vector<std::size_t>& model) const {
    std::vector<std::string> names;
    for (std::size_t term : Sorted(model)) names.push_back(problem_.design.terms[term].name);
    return names;
  }

  /// DESIGN.md's formulas, written out again here on purpose.
  std::optional<double> ScoreOf(double rss, double k) const {
    const double n = n_;
    if (n <= k) return std::nullopt;
    if (options_.criterion == Criterion::kPartialF) return rss / (n - k);
    if (options_.criterion == Criterion::kAdjR2) {
      if (tss_ <= 0) return std::nullopt;
      return -(1 - (rss / (n - k)) / (tss_ / (problem_.design.intercept ? n - 1 : n)));
    }
    if (options_.criterion == Criterion::kCp) {
      if (!sigma2_full_) return std::nullopt;
      return rss / *sigma2_full_ - n + 2 * k;
    }
    if (rss <= 0) return std::nullopt;
    const double minus_two_log_l = n * (std::log(2 * std::numbers::pi) + std::log(rss / n) + 1);
    switch (options_.criterion) {
      case Criterion::kAic: return minus_two_log_l + 2 * (k + 1);
      case Criterion::kBic: return minus_two_log_l + std::log(n) * (k + 1);
      case Criterion::kAicc:
        if (n - k - 2 <= 0) return std::nullopt;
        return minus_two_log_l + 2 * (k + 1) + 2 * (k + 1) * (k + 2) / (n - k - 2);
      default: return std::nullopt;
    }
  }

  bool HierarchyAllowsAdd(const std::vector<std::size_t>& model, std::size_t term) const {
    if (!options_.hierarchy) return true;
    for (std::size_t part : problem_.design.terms[term].parts) {
      if (std::find(model.begin(), model.end(), part) == model.end()) return false;
    }
    return true;
  }
  bool HierarchyAllowsRemove(const std::vector<std::size_t>& model, std::size_t term) const {
    if (!options_.hierarchy) return true;
    for (std::size_t other : model) {
      const auto& parts = problem_.design.terms[other].parts;
      if (std::find(parts.begin(), parts.end(), term) != parts.end()) return false;
    }
    return true;
  }

  std::optional<Candidate> Choose(const std::vector<std::size_t>& model, MoveAction action) {
    const double rss_now = OracleRss(problem_, model);
    const double k_now = K(model);
    current_score_ = score_ ? score_(model) : ScoreOf(rss_now, k_now);
    std::vector<Candidate> scored;
    std::vector<std::size_t> pool;
    if (action == MoveAction::kAdd) {
      for (std::size_t term : candidates_) {
        if (std::find(model.begin(), model.end(), term) == model.end()) pool.push_back(term);
      }
    } else {
      for (std::size_t term : Sorted(model)) {
        if (std::find(keep_.begin(), keep_.end(), term) == keep_.end()) pool.push_back(term);
      }
    }
    for (std::size_t term : pool) {
      std::vector<std::size_t> changed = model;
      if (action == MoveAction::kAdd) changed.push_back(term);
      else changed.erase(std::find(changed.begin(), changed.end(), term));
      const double rss = OracleRss(problem_, changed);
      const double k = K(changed);
      Candidate candidate;
      candidate.term = term;
      const double d = static_cast<double>(problem_.design.terms[term].column_count);
      const double rss_with = action == MoveAction::kAdd ? rss : rss_now;
      const double rss_without = action == MoveAction::kAdd ? rss_now : rss;
      const double k_with = action == MoveAction::kAdd ? k : k_now;
      bool p_defined = false;
      if (n_ - k_with > 0 && rss_with > 0) {
        candidate.f = std::max(0.0, (rss_without - rss_with) / d) / (rss_with / (n_ - k_with));
        boost::math::fisher_f_distribution<double> distribution(d, n_ - k_with);
        candidate.p = boost::math::cdf(boost::math::complement(distribution, candidate.f));
        p_defined = true;
      }
      const auto score = score_ ? score_(changed) : ScoreOf(rss, k);
      const bool allowed = action == MoveAction::kAdd ? HierarchyAllowsAdd(model, term)
                                                      : HierarchyAllowsRemove(model, term);
      if (options_.criterion == Criterion::kPartialF) candidate.eligible = allowed && p_defined;
      else candidate.eligible = allowed && score.has_value();
      candidate.score = score.value_or(0);
      scored.push_back(candidate);
    }
    std::optional<Candidate> best;
    std::pair<double, double> best_key;
    for (const auto& candidate : scored) {
      if (!candidate.eligible) continue;
      std::pair<double, double> key{candidate.score, 0.0};
      if (options_.criterion == Criterion::kPartialF) {
        key = action == MoveAction::kAdd ? std::make_pair(candidate.p, -candidate.f)
                                         : std::make_pair(-candidate.p, candidate.f);
      }
      if (!best) { best = candidate; best_key = key; continue; }
      const bool tie = Tie(key.first, best_key.first);
      if ((!tie && key.first < best_key.first) ||
          (tie && !Tie(key.second, best_key.second) && key.second < best_key.second)) {
        best = candidate;
        best_key = key;
      }
    }
    return best;
  }

  bool TakeAdd(const std::vector<std::size_t>&, const Candidate& best) const {
    if (options_.criterion == Criterion::kPartialF) return best.p < options_.entry_p;
    if (!current_score_) return true;
    return best.score < *current_score_ && !Tie(best.score, *current_score_);
  }
  bool TakeRemove(const std::vector<std::size_t>&, const Candidate& best) const {
    if (options_.criterion == Criterion::kPartialF) return best.p > options_.exit_p;
    if (!current_score_) return true;
    return best.score < *current_score_ && !Tie(best.score, *current_score_);
  }

  const DenseProblem& problem_;
  const SearchOptions& options_;
  OracleScore score_;
  double n_;
  double tss_ = 0;
  std::optional<double> sigma2_full_;
  std::optional<double> current_score_;
  std::vector<std::size_t> keep_, candidates_;
};

}  // namespace

double OracleRss(const DenseProblem& problem, const std::vector<std::size_t>& terms) {
  const auto columns = ColumnsOf(problem, terms);
  if (columns.empty()) return arma::accu(arma::square(problem.y));
  const arma::mat x = problem.x.cols(arma::uvec(columns));
  arma::vec beta;
  if (!arma::solve(beta, x, problem.y, arma::solve_opts::no_approx)) {
    throw std::runtime_error("OracleRss: least squares failed (rank-deficient design?)");
  }
  return arma::accu(arma::square(problem.y - x * beta));
}

OracleRoute OracleSearch(const DenseProblem& problem, const SearchOptions& options) {
  if (options.method == Method::kAllSubsets || options.method == Method::kNone) {
    throw std::invalid_argument("OracleSearch: greedy methods only");
  }
  return Oracle(problem, options).Run();
}

OracleRoute OracleSearch(const DenseProblem& problem, const SearchOptions& options, OracleScore score) {
  if (options.method == Method::kAllSubsets || options.method == Method::kNone ||
      options.criterion == Criterion::kPartialF || !score) {
    throw std::invalid_argument("OracleSearch with a score: greedy methods and a score-based criterion only");
  }
  return Oracle(problem, options, std::move(score)).Run();
}

OracleRoute RouteOf(const SearchResult& result, const Design& design) {
  OracleRoute route;
  for (const auto& step : result.steps) {
    if (step.action == StepAction::kAdd) route.moves.push_back({MoveAction::kAdd, step.term});
    if (step.action == StepAction::kRemove) route.moves.push_back({MoveAction::kRemove, step.term});
  }
  std::vector<std::size_t> terms = result.final_term_indices;
  std::sort(terms.begin(), terms.end());
  for (std::size_t term : terms) route.final_terms.push_back(design.terms[term].name);
  return route;
}

namespace {
std::string Describe(const OracleRoute& route) {
  std::string text;
  for (const auto& move : route.moves) text += std::string(move.action == MoveAction::kAdd ? " +" : " -") + move.term;
  text += " => {";
  for (std::size_t i = 0; i < route.final_terms.size(); ++i) text += (i ? ", " : "") + route.final_terms[i];
  return text + "}";
}
}  // namespace

void ExpectSameRoute(const OracleRoute& expected, const OracleRoute& actual, const std::string& label) {
  EXPECT_EQ(Describe(expected), Describe(actual)) << label << " (expected: refit oracle; actual: kernel search)";
}

}  // namespace stepledger::testing

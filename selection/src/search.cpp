#include "stepledger/selection/search.h"

#include <algorithm>
#include <cmath>
#include <iomanip>
#include <limits>
#include <set>
#include <sstream>
#include <stdexcept>

#include "search_internal.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {

using selection_detail::Num;
using selection_detail::Threshold;
using selection_detail::SearchContext;

void ValidateSearchSettings(const SearchOptions& options, bool allow_cycling_thresholds) {
  auto check_probability = [](const char* key, double value) {
    if (!(value > 0 && value < 1)) {
      throw PlanError(key, std::string(key) + " must be in (0, 1); got " + Threshold(value));
    }
  };
  check_probability("entry_p", options.entry_p);
  check_probability("exit_p", options.exit_p);
  if (!allow_cycling_thresholds && options.method == Method::kStepwise &&
      options.criterion == Criterion::kPartialF && options.entry_p > options.exit_p) {
    throw PlanError("entry_p", "entry_p " + Threshold(options.entry_p) + " is above exit_p " +
                                   Threshold(options.exit_p) +
                                   ": stepwise by partial F could add and remove the same term "
                                   "forever; make entry_p <= exit_p");
  }
  if (options.best_per_size < 1) throw PlanError("best_per_size", "best_per_size must be at least 1");
  if (!(options.subset_tolerance >= 0 && options.subset_tolerance < 1)) {
    throw PlanError("subset_tolerance", "expected a number from 0 up to but not including 1, found " +
                                            Threshold(options.subset_tolerance));
  }
  // The resampling settings' ranges (engine/resampling.h). The plan reader checks their types
  // only, and words its messages as these ("expected ..., found ..."), so a plan file and the
  // command line say the same.
  if (options.folds < static_cast<int>(kMinFolds) || options.folds > static_cast<int>(kMaxFolds)) {
    throw PlanError("folds", "expected an integer from " + std::to_string(kMinFolds) + " to " +
                                 std::to_string(kMaxFolds) + ", found " + std::to_string(options.folds));
  }
  if (options.holdout && !(options.holdout->fraction > 0 && options.holdout->fraction < 1)) {
    throw PlanError("holdout.fraction",
                    "expected a number strictly between 0 and 1, found " + Threshold(options.holdout->fraction));
  }
  if (options.bootstrap && (options.bootstrap->replicates < 1 || options.bootstrap->replicates > kMaxReplicates)) {
    throw PlanError("bootstrap.replicates", "expected an integer from 1 to " + std::to_string(kMaxReplicates) +
                                                ", found " + std::to_string(options.bootstrap->replicates));
  }
  std::set<std::string> kept;
  for (std::size_t position = 0; position < options.keep.size(); ++position) {
    const std::string key = "keep[" + std::to_string(position) + "]";
    if (!kept.insert(options.keep[position]).second) {
      throw PlanError(key, "term '" + options.keep[position] + "' is listed twice");
    }
  }
  std::set<std::string> never;
  for (std::size_t position = 0; position < options.never.size(); ++position) {
    const std::string key = "never[" + std::to_string(position) + "]";
    const auto& name = options.never[position];
    if (kept.count(name)) throw PlanError(key, "term '" + name + "' is also in keep");
    if (!never.insert(name).second) throw PlanError(key, "term '" + name + "' is listed twice");
  }
  if (options.max_terms && options.keep.size() > *options.max_terms) {
    throw PlanError("max_terms", "max_terms " + std::to_string(*options.max_terms) + " is below the " +
                                     std::to_string(options.keep.size()) + " kept terms");
  }
}

double AllSubsetsWorstCaseLog2(std::size_t candidates, std::size_t max_free_terms) {
  // log2 of sum_s C(m, s), summed in log space (C(m, s) overflows a double from m = 1030).
  const double m = static_cast<double>(candidates);
  const std::size_t top = std::min(candidates, max_free_terms);
  double largest = -std::numeric_limits<double>::infinity();
  std::vector<double> terms(top + 1);
  for (std::size_t s = 0; s <= top; ++s) {
    const double k = static_cast<double>(s);
    terms[s] = (std::lgamma(m + 1) - std::lgamma(k + 1) - std::lgamma(m - k + 1)) / std::log(2.0);
    largest = std::max(largest, terms[s]);
  }
  double sum = 0;
  for (double term : terms) sum += std::exp2(term - largest);
  return largest + std::log2(sum);
}

namespace {

std::string Log2Text(double log2_count) {
  std::ostringstream text;
  text << std::fixed << std::setprecision(1) << log2_count;
  return "2^" + text.str();
}

// The refusal of an all-subsets plan whose worst case is past the limit, before any pass.
void CheckAllSubsetsWork(const SearchOptions& options, const Design& design) {
  // Candidates: the terms neither kept nor never used (names checked, listed once).
  const std::size_t keep = options.keep.size();
  const std::size_t candidates = design.terms.size() - keep - options.never.size();
  const std::size_t max_free = selection_detail::MostFreeTermsInModel(options, keep, candidates);
  // The tree keeps a triangle of the free terms' design columns at every depth of its path, in
  // every thread: (m + 1) q^2 doubles per thread, q the free columns plus y.
  std::size_t free_columns = 1;
  for (const DesignTerm& term : design.terms) {
    const bool fixed = std::find(options.keep.begin(), options.keep.end(), term.name) != options.keep.end() ||
                       std::find(options.never.begin(), options.never.end(), term.name) != options.never.end();
    if (!fixed) free_columns += term.column_count;
  }
  const double tree_bytes = static_cast<double>(candidates + 1) * static_cast<double>(free_columns) *
                            static_cast<double>(free_columns) * sizeof(double);
  if (tree_bytes > static_cast<double>(kMaxAllSubsetsTreeBytes)) {
    throw PlanError("method", "all-subsets over " + std::to_string(candidates) + " candidate terms of " +
                                  std::to_string(free_columns - 1) + " design columns would hold " +
                                  std::to_string(static_cast<std::uint64_t>(tree_bytes) >> 20) +
                                  " MB of triangles per thread; it takes at most " +
                                  std::to_string(kMaxAllSubsetsTreeBytes >> 20) +
                                  " MB: use \"method\": \"stepwise\" (or forward, backward), or move terms the "
                                  "search need not decide to \"keep\" or \"never\"");
  }
  const bool tolerant = options.subset_tolerance > 0;
  const double limit = tolerant ? kMaxAllSubsetsLog2WithTolerance : kMaxAllSubsetsLog2;
  const double work = AllSubsetsWorstCaseLog2(candidates, max_free);
  // 1e-9: 50 candidate terms without max_terms are 2^50 exactly, the limit.
  if (work <= limit + 1e-9) return;
  std::size_t fitting = 0;  // the most free terms a model may have within the limit
  while (fitting < candidates && AllSubsetsWorstCaseLog2(candidates, fitting + 1) <= limit + 1e-9) ++fitting;
  std::string ways = "set \"max_terms\" to at most " + std::to_string(keep + fitting) + " (" +
                     Log2Text(AllSubsetsWorstCaseLog2(candidates, fitting)) + " subsets)";
  if (!tolerant && AllSubsetsWorstCaseLog2(candidates, max_free) <= kMaxAllSubsetsLog2WithTolerance + 1e-9) {
    ways += ", or allow a \"subset_tolerance\" (such as 0.01: each listed model within 1% of the RSS of "
            "the exact one of its rank; the limit is then " + Log2Text(kMaxAllSubsetsLog2WithTolerance) + ")";
  }
  ways += ", or use \"method\": \"stepwise\" (or forward, backward), or move terms the search need not "
          "decide to \"keep\" or \"never\"";
  throw PlanError("method", "all-subsets over " + std::to_string(candidates) + " candidate terms (" +
                                std::to_string(design.terms.size()) + " terms, " + std::to_string(keep) + " kept, " +
                                std::to_string(options.never.size()) + " never" +
                                (options.max_terms ? ", at most " + std::to_string(*options.max_terms) + " terms" : "") +
                                ") could have to read " + Log2Text(work) + " subsets; it takes plans of at most " +
                                Log2Text(limit) + (tolerant ? " with a tolerance" : "") + ": " + ways);
}

}  // namespace

void ValidateSearchOptions(const SearchOptions& options, const Design& design,
                           bool allow_cycling_thresholds) {
  ValidateSearchSettings(options, allow_cycling_thresholds);
  auto check_names = [&design](const std::vector<std::string>& names, const char* list) {
    for (std::size_t position = 0; position < names.size(); ++position) {
      if (design.FindTerm(names[position]) != kNoTerm) continue;
      std::string made;
      for (std::size_t t = 0; t < design.terms.size() && t < 12; ++t) {
        made += (t == 0 ? "'" : ", '") + design.terms[t].name + "'";
      }
      if (design.terms.size() > 12) made += ", ...";
      throw PlanError(std::string(list) + "[" + std::to_string(position) + "]",
                      "no term named '" + names[position] + "' in the design (its terms: " + made + ")");
    }
  };
  check_names(options.keep, "keep");
  check_names(options.never, "never");
  if (options.method == Method::kAllSubsets) CheckAllSubsetsWork(options, design);
}

SearchResult RunSearch(const Factor& factor, const Design& design, const SearchOptions& options,
                       SearchObserver* observer, const SearchRunOptions& run) {
  ValidateSearchOptions(options, design, run.allow_cycling_thresholds);
  run.kernel.Validate();
  if (factor.column_count() != design.column_count()) {
    // The caller folded the factor from another design: a bug in the caller, not bad input.
    throw std::logic_error("RunSearch (a bug in the caller): the factor has " +
                           std::to_string(factor.column_count()) + " design columns but the design has " +
                           std::to_string(design.column_count()));
  }
  if (options.criterion == Criterion::kCv && run.cross_validation != nullptr) {
    // The fold factors come from the same pass as the factor, with the plan's folds.
    const CrossValidation& cv = *run.cross_validation;
    if (cv.fold(0).column_count() != design.column_count() ||
        cv.folds() != static_cast<std::size_t>(options.folds)) {
      throw std::logic_error("RunSearch (a bug in the caller): " + std::to_string(cv.folds()) +
                             " fold factors of " + std::to_string(cv.fold(0).column_count()) +
                             " design columns, but the plan has folds " + std::to_string(options.folds) +
                             " and the design " + std::to_string(design.column_count()) + " columns");
    }
  }
  RouteRecorder recorder;
  ObserverFanOut fan_out({&recorder, observer});
  SearchContext ctx(factor, design, options, run, fan_out);

  if (ctx.candidates().empty() && options.method != Method::kNone) {
    ctx.StartFromBase();
    ctx.EmitStart(std::string(ToString(options.method)) + ": start from the intercept and the kept terms", {});
    ctx.Stop(SearchOutcome::kNoEligibleTerms,
             "no candidate terms: of " + std::to_string(design.terms.size()) + " terms, " +
                 std::to_string(options.keep.size()) + " kept and " +
                 std::to_string(options.never.size()) + " never");
  } else {
    switch (options.method) {
      case Method::kForward: selection_detail::RunForward(ctx); break;
      case Method::kBackward: selection_detail::RunBackward(ctx); break;
      case Method::kStepwise: selection_detail::RunStepwise(ctx); break;
      case Method::kAllSubsets: selection_detail::RunAllSubsets(ctx); break;
      case Method::kNone: {
        auto excluded = ctx.StartFromFull();
        ctx.EmitStart("none: the intercept, the kept terms and every eligible term", std::move(excluded));
        ctx.Stop(SearchOutcome::kCompleted, "method none: no selection");
        break;
      }
    }
  }

  SearchResult result;
  result.outcome = ctx.outcome();
  result.method = options.method;
  result.criterion = options.criterion;
  result.steps = recorder.steps();
  result.subsets = recorder.subsets();
  result.excluded = recorder.excluded();
  result.final_terms = ctx.ModelTermNames();
  result.final_term_indices = ctx.model_terms();
  result.final_criterion_value = ctx.Reported(ctx.CurrentScore());
  result.final_rss = ctx.state().Rss();
  result.stop_rule = ctx.stop_rule();
  result.n = ctx.criterion_context().n;
  result.tss = ctx.criterion_context().tss;
  result.cp_sigma2 = ctx.criterion_context().full_sigma2;
  result.subsets_evaluated = ctx.subsets_evaluated;
  result.subset_nodes = ctx.subset_tree_nodes;
  result.subset_tolerance = ctx.subset_tolerance_used;
  return result;
}

namespace {

std::string Optional(Criterion criterion, const std::optional<double>& value) {
  return value ? FormatCriterionValue(criterion, value) : "-";
}

std::string JoinNames(const std::vector<std::string>& names) {
  if (names.empty()) return "(none)";
  std::string text;
  for (const auto& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
}

std::string ValueName(Criterion criterion) {
  return criterion == Criterion::kPartialF ? "residual mean square" : ToString(criterion);
}

}  // namespace

std::string SearchResult::SubsetGuarantee() const {
  if (method != Method::kAllSubsets) return "";
  if (subset_tolerance == 0) return "exact: the models listed for each size are that size's best by RSS";
  const std::string tau = Threshold(subset_tolerance);
  return "within a relative tolerance of " + tau + ": the r-th model listed for each size has an RSS at most (1 + " +
         tau + ") times that of the size's r-th best model, so the first is within " + tau + " of the best";
}

std::string SearchResult::BriefReport() const {
  std::ostringstream out;
  out << ToString(method) << " selection by " << ToString(criterion) << ": " << ToString(outcome)
      << "\n";
  out << "final terms (" << final_terms.size() << "): " << JoinNames(final_terms) << "\n";
  out << ValueName(criterion) << " " << Optional(criterion, final_criterion_value) << ", RSS "
      << Num(final_rss) << ", n " << FormatCount(static_cast<std::int64_t>(n)) << "\n";
  out << "stop rule: " << stop_rule << "\n";
  return out.str();
}

std::string SearchResult::FullReport() const {
  std::ostringstream out;
  out << BriefReport() << "\n";
  std::size_t term_width = 4;
  for (const auto& step : steps) term_width = std::max(term_width, step.term.size());
  const std::string value_name = ValueName(criterion);
  // Partial F decides by each move's F test: the route shows F and p, not the residual mean square.
  const bool by_test = criterion == Criterion::kPartialF;
  out << "route (" << (by_test ? std::string("F test of each move") : value_name + " before -> after") << ")\n";
  out << std::left << std::setw(5) << "step" << std::setw(8) << "action"
      << std::setw(static_cast<int>(term_width + 2)) << "term" << std::setw(28) << (by_test ? "F test" : "criterion")
      << "rule\n";
  for (const auto& step : steps) {
    std::string change;
    const bool move = step.action == StepAction::kAdd || step.action == StepAction::kRemove;
    if (by_test) {
      change = move ? "F = " + FormatStatistic(step.f) + ", " + PValueClause(step.p) : "";
    } else if (move) {
      change = Optional(criterion, step.criterion_before) + " -> " + Optional(criterion, step.criterion_value);
    } else {
      change = Optional(criterion, step.criterion_value);
    }
    out << std::left << std::setw(5) << step.index << std::setw(8) << ToString(step.action)
        << std::setw(static_cast<int>(term_width + 2)) << (step.term.empty() ? "." : step.term)
        << std::setw(28) << change << step.rule << "\n";
    if (!step.ties.empty()) {
      out << "     tie: " << JoinNames(step.ties) << " scored the same; plan order chose "
          << step.term << "\n";
    }
  }
  if (!excluded.empty()) {
    out << "\nleft out before the search\n";
    for (const auto& item : excluded) out << "  " << item.term << ": " << item.reason << "\n";
  }
  if (!subsets.empty()) {
    out << "\nbest subsets by RSS (" << subsets_evaluated << " models evaluated";
    if (subset_nodes > 0) out << " at " << subset_nodes << " nodes of the search tree";
    out << ")\n" << SubsetGuarantee() << "\n";
    out << std::left << std::setw(6) << "size" << std::setw(6) << "rank" << std::setw(16) << "RSS"
        << std::setw(16) << value_name << "terms\n";
    for (const auto& subset : subsets) {
      out << std::left << std::setw(6) << subset.size << std::setw(6) << subset.rank_in_size
          << std::setw(16) << Num(subset.rss) << std::setw(16) << Optional(criterion, subset.score)
          << JoinNames(subset.terms) << "\n";
    }
  }
  return out.str();
}

}  // namespace stepledger

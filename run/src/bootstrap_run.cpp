#include "bootstrap_run.h"

#include <algorithm>
#include <armadillo>
#include <atomic>
#include <exception>
#include <map>
#include <mutex>
#include <string>
#include <thread>

#include "stepledger/engine/linear_algebra_threads.h"
#include "stepledger/engine/bootstrap_pass.h"
#include "stepledger/engine/errors.h"

namespace stepledger::run_detail {

void CheckBootstrapPlan(const SearchOptions& search, const Design& design) {
  if (!search.bootstrap) return;
  if (search.criterion == Criterion::kCv) {
    throw PlanError("bootstrap",
                    "a bootstrap with criterion cv would build folds x replicates factors (" +
                        std::to_string(search.folds) + " x " + std::to_string(search.bootstrap->replicates) +
                        "); choose another criterion for the bootstrap's selection (the final model's k-fold "
                        "error is reported with every criterion)");
  }
  const std::uint64_t bytes =
      BootstrapFactorBytes(design.column_count(), search.bootstrap->replicates, BootstrapPassOptions{}.block_rows);
  if (bytes > kBootstrapFactorBudget) {
    throw PlanError("bootstrap.replicates",
                    std::to_string(search.bootstrap->replicates) + " replicates over " +
                        std::to_string(design.column_count()) + " design columns need " +
                        std::to_string(bytes >> 20) + " MB of replicate factors, more than " +
                        std::to_string(kBootstrapFactorBudget >> 20) + " MB; use fewer replicates or fewer terms");
  }
}

namespace {

// Bootstrap percentile interval: Hyndman and Fan's definition 5 (Armadillo's quantile).
std::pair<double, double> PercentileInterval(const std::vector<double>& values, double confidence_level) {
  const arma::vec data(values);
  const double tail = (1 - confidence_level) / 2;
  const arma::vec probabilities{tail, 1 - tail};
  const arma::vec bounds = arma::quantile(data, probabilities);
  return {bounds(0), bounds(1)};
}

std::vector<std::size_t> Sorted(std::vector<std::size_t> terms) {
  std::sort(terms.begin(), terms.end());
  return terms;
}

}  // namespace

BootstrapValidation SummariseReplicates(const std::vector<ReplicateOutcome>& outcomes, const Design& design,
                                        const BootstrapSettings& settings, std::vector<std::size_t> chosen_terms,
                                        double confidence_level) {
  BootstrapValidation result;
  result.settings = settings;
  const std::size_t terms = design.terms.size();
  const double replicates = static_cast<double>(outcomes.size());
  if (outcomes.empty()) return result;

  // Which replicate holds which term; the models and sizes.
  std::vector<std::vector<bool>> holds(outcomes.size(), std::vector<bool>(terms, false));
  std::vector<std::size_t> term_count(terms, 0);
  std::map<std::size_t, std::size_t> sizes;
  std::map<std::vector<std::size_t>, std::size_t> models;
  for (std::size_t r = 0; r < outcomes.size(); ++r) {
    for (std::size_t term : outcomes[r].terms) {
      holds[r].at(term) = true;
      ++term_count[term];
    }
    ++sizes[outcomes[r].terms.size()];
    ++models[Sorted(outcomes[r].terms)];
  }
  for (std::size_t t = 0; t < terms; ++t) {
    result.inclusion.push_back({design.terms[t].name, static_cast<double>(term_count[t]) / replicates});
  }
  for (const auto& size : sizes) result.sizes.push_back({size.first, size.second});

  // The ten most frequent models, ties in plan order of their sorted term lists (the map's order).
  std::vector<std::pair<std::vector<std::size_t>, std::size_t>> ranked(models.begin(), models.end());
  std::stable_sort(ranked.begin(), ranked.end(),
                   [](const auto& a, const auto& b) { return a.second > b.second; });
  if (ranked.size() > 10) ranked.resize(10);
  const std::vector<std::size_t> chosen = Sorted(std::move(chosen_terms));
  for (const auto& model : ranked) {
    ModelFrequency frequency;
    for (std::size_t term : model.first) frequency.terms.push_back(design.terms[term].name);
    frequency.frequency = static_cast<double>(model.second) / replicates;
    frequency.chosen = model.first == chosen;
    result.chosen_among_top = result.chosen_among_top || frequency.chosen;
    result.models.push_back(std::move(frequency));
  }

  // Every design column of a term: conditional and unconditional percentile intervals.
  for (std::size_t t = 0; t < terms; ++t) {
    for (std::size_t column : design.TermColumns(t)) {
      CoefficientSpread spread;
      spread.name = design.columns[column].name;
      std::vector<double> conditional, unconditional;
      unconditional.reserve(outcomes.size());
      for (std::size_t r = 0; r < outcomes.size(); ++r) {
        const double value = outcomes[r].coefficients.at(column);
        unconditional.push_back(holds[r][t] ? value : 0.0);
        if (holds[r][t]) conditional.push_back(value);
      }
      spread.inclusion = static_cast<double>(conditional.size()) / replicates;
      if (!conditional.empty()) spread.conditional = PercentileInterval(conditional, confidence_level);
      spread.unconditional = PercentileInterval(unconditional, confidence_level);
      result.coefficients.push_back(std::move(spread));
    }
  }

  // Substitute pairs (README "Bootstrap stability").
  for (std::size_t a = 0; a < terms; ++a) {
    for (std::size_t b = a + 1; b < terms; ++b) {
      std::size_t both = 0, a_only = 0, b_only = 0;
      for (std::size_t r = 0; r < outcomes.size(); ++r) {
        if (holds[r][a] && holds[r][b]) ++both;
        else if (holds[r][a]) ++a_only;
        else if (holds[r][b]) ++b_only;
      }
      const std::size_t rarer = std::min(both + a_only, both + b_only);
      if (rarer == 0) continue;
      SubstitutePair pair;
      pair.first = design.terms[a].name;
      pair.second = design.terms[b].name;
      pair.together = static_cast<double>(both) / replicates;
      pair.first_only = static_cast<double>(a_only) / replicates;
      pair.second_only = static_cast<double>(b_only) / replicates;
      pair.statistic = 1.0 - static_cast<double>(both) / static_cast<double>(rarer);
      if (pair.statistic >= kSubstituteStatisticThreshold && pair.first_only >= kSubstituteAloneShare &&
          pair.second_only >= kSubstituteAloneShare) {
        result.substitutes.push_back(std::move(pair));
      }
    }
  }
  return result;
}

BootstrapValidation RunBootstrap(const BootstrapFactorBuilder& build_factors, const Design& design,
                                 const SearchOptions& search,
                                 const FitOptions& fit_options, int threads, const SearchResult& chosen,
                                 SearchObserver* observer) {
  const BootstrapSettings settings = search.bootstrap.value();
  BootstrapPassOptions pass;
  pass.settings = settings;
  pass.holdout = search.holdout;
  pass.threads = threads;
  const auto rows_total = static_cast<std::uint64_t>(chosen.n);
  if (observer) {
    pass.progress = [observer, rows_total](std::uint64_t rows_done) {
      observer->OnProgress({"bootstrap rows", rows_done, std::max(rows_total, rows_done)});
    };
  }
  std::vector<Factor> factors = build_factors(pass);

  // Each replicate's selection and final fit from its factor alone (no refinement: the rows are
  // not replayed per replicate), in replicate order per thread; results land by index.
  SearchOptions replicate_search = search;
  replicate_search.bootstrap.reset();
  SearchRunOptions run;
  run.kernel = fit_options.kernel;
  FitOptions replicate_fit = fit_options;
  replicate_fit.max_refinement_passes = 0;
  std::vector<ReplicateOutcome> outcomes(factors.size());
  std::mutex progress_mutex;
  std::size_t finished = 0;
  std::exception_ptr failure;
  std::atomic<bool> failed{false};  // the other threads stop at their next replicate
  const auto started = std::this_thread::get_id();
  auto work = [&](std::size_t first, std::size_t stride) {
    for (std::size_t r = first; r < factors.size() && !failed.load(); r += stride) {
      try {
        const SearchResult result = RunSearch(factors[r], design, replicate_search, nullptr, run);
        FitOptions options = replicate_fit;
        options.cp_sigma2 = result.cp_sigma2;
        const FitResult fit = FitModel(factors[r], design, result.final_term_indices, options);
        ReplicateOutcome& outcome = outcomes[r];
        outcome.terms = result.final_term_indices;
        outcome.coefficients.assign(design.column_count(), 0.0);
        for (std::size_t i = 0; i < fit.columns.size(); ++i) outcome.coefficients[fit.columns[i]] = fit.beta(i);
      } catch (const std::exception& error) {
        const std::lock_guard<std::mutex> lock(progress_mutex);
        if (!failure) {
          failure = std::make_exception_ptr(NumericalError("bootstrap replicate " + std::to_string(r + 1) + " of " +
                                                           std::to_string(factors.size()) + ": " + error.what()));
        }
        failed.store(true);
        return;
      }
      factors[r] = Factor{};  // its memory is no longer needed
      const std::lock_guard<std::mutex> lock(progress_mutex);
      ++finished;
      // Progress from the calling thread only (observers need not be thread-safe).
      if (observer && std::this_thread::get_id() == started) {
        observer->OnProgress({"bootstrap replicates", finished, factors.size()});
      }
    }
  };
  // Each replicate's selection calls LAPACK: no more threads than the address space has OpenBLAS
  // buffers for (the replicates land by index, so the count does not change the result).
  const std::size_t workers = ThreadsForLinearAlgebra(
      std::min<std::size_t>(static_cast<std::size_t>(std::max(threads, 1)), factors.size()), "the bootstrap");
  {
    std::vector<std::jthread> helpers;
    for (std::size_t t = 1; t < workers; ++t) helpers.emplace_back(work, t, workers);
    work(0, workers);
  }
  if (failure) std::rethrow_exception(failure);
  if (observer) observer->OnProgress({"bootstrap replicates", factors.size(), factors.size()});
  return SummariseReplicates(outcomes, design, settings, chosen.final_term_indices, fit_options.confidence_level);
}

}  // namespace stepledger::run_detail

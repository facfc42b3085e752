#include "stepledger/run/run_plan.h"

#include <algorithm>
#include <chrono>
#include <fstream>
#include <string_view>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/engine/table_scan.h"
#include "bootstrap_run.h"
#include "shared_run.h"
#include "validation_run.h"

namespace stepledger {

void RunOptions::Validate() const {
  if (threads < 1) {
    throw InputError("threads: expected at least 1, got " + std::to_string(threads));
  }
  if (!(vif_caution > 0)) {
    throw InputError("vif_caution: expected a number above 0, got " + std::to_string(vif_caution));
  }
  fit.Validate();
  limits.Validate();
}

std::string FingerprintFile(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path.string() + ": cannot open the data file");
  DataFingerprint fingerprint;
  std::vector<char> buffer(1 << 16);
  while (in) {
    in.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    const std::streamsize got = in.gcount();
    if (got > 0) fingerprint.Update(std::string_view(buffer.data(), static_cast<std::size_t>(got)));
  }
  if (in.bad()) throw InputError(path.string() + ": read error");
  return fingerprint.Finish();
}

DataSetFingerprints FingerprintDataSet(const DataSet& data) {
  DataSetFingerprints result;
  if (data.columns) {  // data in memory: the fingerprint of the canonical form, no spill
    ScanOptions scan_options;
    scan_options.spill = false;
    result.sha256 = ScanData(data, scan_options).sha256;
    return result;
  }
  std::vector<std::string> fingerprints;
  for (const std::filesystem::path& file : DataSetFiles(data)) {
    DataFileRecord record;
    record.name = file.filename().string();
    record.sha256 = FingerprintFile(file);
    std::error_code error;
    const auto size = std::filesystem::file_size(file, error);
    record.bytes = error ? 0 : static_cast<std::uint64_t>(size);
    fingerprints.push_back(record.sha256);
    result.files.push_back(std::move(record));
  }
  result.sha256 = CombineMemberFingerprints(fingerprints);
  return result;
}

RunResult RunPlan(const DataSet& data, const LoadedPlan& plan,
                  const RunOptions& options, SearchObserver* observer) {
  const auto started = std::chrono::steady_clock::now();
  options.Validate();
  RunResult run;
  run.plan = plan;
  run.options = options;
  run.options.csv.missing_tokens = plan.plan.missing_tokens;
  run.options.csv.max_columns = options.limits.columns;
  run.data_file_name = DataSetFileName(data);

  ScanOptions scan_options;
  scan_options.csv = run.options.csv;
  scan_options.threads = options.threads;
  scan_options.work_dir = options.work_dir;
  scan_options.shares = options.shares;
  const bool sharing = options.shares != nullptr && options.shares->count() > 1;
  // The levels limit, not the plan's max_levels: a plan must not decide how much memory a scan
  // may take (a column past the limit cannot be a categorical term; BuildDesign says which rule).
  scan_options.profile.max_levels = static_cast<std::size_t>(options.limits.levels);
  ScanResult scan = ScanData(data, scan_options);
  run.profile = std::move(scan.profile);
  run.data_bytes = scan.stored_bytes;
  run.data_sha256 = scan.sha256;
  run.data_encoding = scan.encoding;
  run.data_in_memory = scan.in_memory;
  if (sharing) {
    run.processes = options.shares->count();
    run.layout = std::to_string(scan.ranges) + " ranges of " + std::to_string(scan.files.size()) +
                 (scan.files.size() == 1 ? " file" : " files") + " shared by " + std::to_string(run.processes) +
                 " processes (every plain file cut into byte ranges, an even share each; a compressed file or "
                 "a stream read whole by one)";
  }
  run.data_is_set = scan.files.size() > 1 || data.inputs.size() > 1 ||
                    (scan.files.size() == 1 && scan.files.front().path != data.inputs.front());
  for (const ScannedFile& file : scan.files) {
    run.data_files.push_back(
        DataFileRecord{file.path.filename().string(), file.stored_bytes, file.sha256, file.encoding, file.rows});
  }
  run.design = BuildDesign(plan.plan.design, run.profile, options.limits);
  // Before the factor pass, so that a plan error costs no pass over the rows.
  ValidateSearchOptions(plan.plan.search, run.design);
  run_detail::CheckBootstrapPlan(plan.plan.search, run.design);

  const SearchOptions& search = plan.plan.search;
  const FoldSettings folds{static_cast<std::size_t>(search.folds), search.seed};
  PassOptions pass_options;
  pass_options.threads = options.threads;
  pass_options.holdout = search.holdout;
  // The fold factors of every design column come from the factor pass at no extra pass when they
  // fit in kFoldFactorBudget; a wider design gets the folds of its final model's columns from one
  // more replay, and criterion cv (which needs every column's folds) is refused.
  const bool folds_in_pass = FoldFactorBytes(run.design.column_count(), folds.k, options.threads,
                                             pass_options.block_rows) <= kFoldFactorBudget;
  if (folds_in_pass) {
    pass_options.folds = folds;
  } else if (search.criterion == Criterion::kCv) {
    throw PlanError("folds", "criterion cv with " + std::to_string(folds.k) + " folds over " +
                                 std::to_string(run.design.column_count()) +
                                 " design columns needs more than " + std::to_string(kFoldFactorBudget >> 20) +
                                 " MB of fold factors; use fewer folds, fewer terms or --threads 1, or another criterion");
  }
  std::optional<run_detail::SharedRun> shared;
  if (sharing) shared.emplace(*options.shares, scan.spill, run.design, search.holdout);
  PassResult pass = shared ? shared->FactorPass(pass_options) : RunFactorPass(*scan.spill, run.design, pass_options);
  if (shared && !shared->driving()) {
    // The search and everything after it run on process 0; this one answers its requests.
    std::optional<BootstrapPassOptions> bootstrap;
    if (search.bootstrap) {
      bootstrap.emplace();
      bootstrap->settings = *search.bootstrap;
      bootstrap->holdout = search.holdout;
      bootstrap->threads = options.threads;
    }
    shared->Serve(folds, bootstrap);
    throw ShareServed();
  }
  RequireSomethingToFit(pass, run.design, DescribeDataSet(data));
  run.accounting = pass.accounting;
  std::optional<CrossValidation> cross_validation;
  if (folds_in_pass) cross_validation.emplace(std::move(pass.fold_factors), options.fit.kernel);

  SearchRunOptions search_run;
  search_run.kernel = options.fit.kernel;
  search_run.cross_validation = cross_validation ? &*cross_validation : nullptr;
  search_run.threads = options.threads;  // all-subsets shares its subtrees across them
  run.search = RunSearch(pass.factor, run.design, search, observer, search_run);

  FitOptions fit_options = options.fit;
  fit_options.cp_sigma2 = run.search.cp_sigma2;
  // Refinement and diagnostics replay the model's rows: the held-out rows stay out of both.
  // This process's model rows (a plain run); a shared run reaches every process's rows through
  // `shared` (sums for the refinement, diagnosed rows for the diagnostics).
  const RowReplay replay = SpillRowReplay(scan.spill, run.design, search.holdout);
  // Refinement sums rows where they are: a shared run's processes each sum their own.
  run.fit = shared ? FitModel(pass.factor, run.design, run.search.final_term_indices, fit_options,
                              shared->Sums(RowSet::kModelRows))
                   : FitModel(pass.factor, run.design, run.search.final_term_indices, fit_options, &replay);
  // A holdout needs the ranges and the largest leverage of the model's rows to count its own
  // extrapolations, so it learns them even when the diagnostics are not asked for.
  if ((options.diagnostics || search.holdout) && run.fit.n > 0) {
    DiagnosticsOptions diagnostics_options;
    diagnostics_options.rows_by_record = run.data_is_set;
    std::optional<DiagnosticsResult> diagnostics =
        shared ? DiagnoseAndLearnSupport(run.fit, run.design, shared->Diagnosing(RowSet::kModelRows),
                                         run.prediction_support, diagnostics_options)
               : DiagnoseAndLearnSupport(run.fit, run.design, replay, run.prediction_support, diagnostics_options);
    if (diagnostics->rows > 0) {
      run.max_leverage = diagnostics->max_leverage;
      run.max_leverage_line = diagnostics->max_leverage_line;
      run.max_leverage_file = diagnostics->max_leverage_file;
    }
    if (options.diagnostics) run.diagnostics = std::move(diagnostics);
  }
  const run_detail::FoldFactorBuilder build_folds = [&](std::span<const std::size_t> columns) {
    return shared ? shared->FoldFactors(columns, folds)
                  : BuildFoldFactors(*scan.spill, run.design, columns, folds, search.holdout);
  };
  run.validation.folds = run_detail::FinalModelFolds(cross_validation ? &*cross_validation : nullptr, build_folds,
                                                     run.fit, folds, options.fit.kernel);
  if (search.holdout && run.fit.n > 0) {
    const run_detail::HeldOutEvaluator evaluator(run.design, run.fit, run.prediction_support);
    const run_detail::HeldOutReplay held_out =
        shared ? shared->EvaluatingHeldOut()
               : run_detail::EvaluateHere(SpillRowReplay(scan.spill, run.design, search.holdout, RowSet::kHeldOutRows));
    run.validation.holdout = run_detail::EvaluateHoldout(held_out, evaluator, *search.holdout);
  }
  if (search.bootstrap) {
    const run_detail::BootstrapFactorBuilder build_factors = [&](const BootstrapPassOptions& pass) {
      return shared ? shared->BootstrapFactors(pass) : BuildBootstrapFactors(*scan.spill, run.design, pass);
    };
    run.validation.bootstrap = run_detail::RunBootstrap(build_factors, run.design, search, options.fit,
                                                        options.threads, run.search, observer);
  }
  run.duration_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return run;
}

std::vector<std::string> SetFileNames(const RunResult& run) {
  std::vector<std::string> names;
  if (!run.data_is_set) return names;
  for (const DataFileRecord& file : run.data_files) names.push_back(file.name);
  return names;
}

}  // namespace stepledger

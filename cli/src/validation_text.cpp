// The validation results as terminal text (select and fit): the k-fold error beside the
// in-sample residual SD in the summary; the holdout, its calibration and the bootstrap's
// stability in the full text. Numbers follow engine/number_format.h.
#include <algorithm>
#include <cstdint>
#include <sstream>
#include <string>

#include "stepledger/cli/validation_text.h"
#include "stepledger/engine/number_format.h"

namespace stepledger::cli {
namespace {

std::string Count(std::uint64_t count) { return FormatCount(static_cast<std::int64_t>(count)); }

std::string Padded(const std::string& text, std::size_t width) {
  return text.size() >= width ? text : std::string(width - text.size(), ' ') + text;
}

void HoldoutText(const HoldoutValidation& holdout, std::ostringstream& text) {
  text << "Held-out rows (" << FormatPercent(holdout.settings.fraction) << " drawn with seed "
       << holdout.settings.seed << "; errors are observed minus predicted):\n";
  text << "  rows " << Count(holdout.rows) << ", RMSE " << FormatQuantity(holdout.rmse) << ", mean error "
       << FormatQuantity(holdout.mean_error) << ", R² about their own mean " << FormatQuantity(holdout.r2) << "\n";
  if (holdout.rows_outside_ranges > 0 || holdout.rows_high_leverage > 0) {
    text << "  priced by extrapolation: " << Count(holdout.rows_outside_ranges) << " outside the ranges, "
         << Count(holdout.rows_high_leverage) << " above the largest leverage\n";
  }
  if (holdout.calibration.empty()) return;
  text << "  calibration by decile of prediction:\n";
  text << "    decile      rows  mean predicted  mean observed\n";
  for (const CalibrationBin& bin : holdout.calibration) {
    text << "    " << Padded(std::to_string(bin.decile), 6) << "  " << Padded(Count(bin.rows), 8) << "  "
         << Padded(FormatQuantity(bin.mean_prediction), 14) << "  " << Padded(FormatQuantity(bin.mean_observed), 13)
         << "\n";
  }
}

void BootstrapText(const BootstrapValidation& bootstrap, std::ostringstream& text) {
  text << "Stability over " << Count(bootstrap.settings.replicates) << " bootstrap samples (seed "
       << bootstrap.settings.seed << "), the selection rerun on each:\n";
  std::size_t width = 4;
  for (const TermInclusion& term : bootstrap.inclusion) width = std::max(width, term.term.size());
  text << "  share of samples choosing each term:\n";
  for (const TermInclusion& term : bootstrap.inclusion) {
    text << "    " << term.term << std::string(width - term.term.size(), ' ') << "  "
         << Padded(FormatPercent(term.frequency), 6) << "\n";
  }
  text << "  samples by model size:";
  for (std::size_t i = 0; i < bootstrap.sizes.size(); ++i) {
    const SizeFrequency& size = bootstrap.sizes[i];
    text << (i == 0 ? " " : ", ") << size.size << (size.size == 1 ? " term " : " terms ") << Count(size.replicates);
  }
  text << "\n  most frequent models:\n";
  for (const ModelFrequency& model : bootstrap.models) {
    text << "    " << Padded(FormatPercent(model.frequency), 6) << "  " << ModelTermsText(model.terms)
         << (model.chosen ? "  (the chosen model)" : "") << "\n";
  }
  text << "  the chosen model is " << (bootstrap.chosen_among_top ? "" : "not ") << "among them\n";
}

}  // namespace

std::string ValidationSummaryText(const ValidationResult& validation, std::optional<double> residual_sd) {
  const FoldValidation& folds = validation.folds;
  const std::optional<double> sd = folds.residual_sd ? folds.residual_sd : residual_sd;
  std::ostringstream text;
  text << "Error on unseen rows: " << folds.settings.k << "-fold RMSE " << FormatQuantity(folds.rmse);
  if (!folds.rmse && !folds.undefined_reason.empty()) text << " (" << folds.undefined_reason << ")";
  text << " beside the in-sample residual SD " << FormatQuantity(sd) << " (fold seed " << folds.settings.seed
       << ")\n";
  return text.str();
}

std::string ValidationDetailText(const ValidationResult& validation) {
  std::ostringstream text;
  if (validation.holdout) HoldoutText(*validation.holdout, text);
  if (validation.bootstrap) {
    if (validation.holdout) text << "\n";
    BootstrapText(*validation.bootstrap, text);
  }
  return text.str();
}

}  // namespace stepledger::cli

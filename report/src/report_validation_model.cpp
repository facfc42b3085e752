// The report's Validation section: the final model on rows it did not fit (k folds, holdout)
// and the stability of its selection (Poisson bootstrap), read through the audit's typed reader
// (audit/validation_json.h) and formatted once, as the other sections are.
#include <algorithm>
#include <string>
#include <utility>

#include "report_internal.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/engine/number_format.h"

namespace stepledger::report_detail {
namespace {

using V = ReportValue;

void FoldsBlocks(const FoldValidation& folds, const json& model, ReportSection& section) {
  // The residual SD recorded beside the folds, else the model's sigma.
  const std::optional<double> sd = folds.residual_sd ? folds.residual_sd : Number(Get(model, "sigma"));
  std::vector<ReportFact> facts{
      {std::to_string(folds.settings.k) + "-fold RMSE (seed " + std::to_string(folds.settings.seed) + ")",
       V::Quantity(folds.rmse)},
      {"In-sample residual SD", V::Quantity(sd)}};
  if (!folds.rmse && !folds.undefined_reason.empty()) facts.push_back({"Why no k-fold RMSE", V::Text(folds.undefined_reason)});
  section.blocks.push_back(ReportFacts{std::move(facts)});
  section.blocks.push_back(ReportParagraph{
      "Each fold's rows are priced by the model refitted without them (the final model's terms); errors are "
      "observed minus predicted, squared and weighted. A k-fold RMSE well above the residual SD means the fit "
      "flatters the model.",
      "note"});
  if (folds.per_fold.empty()) return;
  ReportTable table;
  table.caption = "Held-out error by fold";
  table.columns = {{"fold", ValueKind::kCount}, {"rows", ValueKind::kCount},
                   {"weight", ValueKind::kQuantity}, {"SSE", ValueKind::kQuantity}};
  for (const FoldOutcome& fold : folds.per_fold) {
    table.rows.push_back({V::Count(static_cast<std::int64_t>(fold.fold)), V::Count(static_cast<std::int64_t>(fold.rows)),
                          V::Quantity(fold.weight), V::Quantity(fold.sse, kCriterionDigits)});
  }
  table.folded = folds.per_fold.size() > 12;
  section.blocks.push_back(std::move(table));
}

void HoldoutBlocks(const HoldoutValidation& holdout, ReportSection& section) {
  section.blocks.push_back(ReportParagraph{
      "Held-out rows: " + FormatPercent(holdout.settings.fraction) + " of the records, drawn with seed " +
          std::to_string(holdout.settings.seed) + ", entered no selection statistic.",
      ""});
  section.blocks.push_back(ReportFacts{{
      {"Held-out rows priced", V::Count(static_cast<std::int64_t>(holdout.rows))},
      {"Holdout RMSE", V::Quantity(holdout.rmse)},
      {"Mean error (observed − predicted)", V::Quantity(holdout.mean_error)},
      {"R² about the holdout's own mean", V::Quantity(holdout.r2)},
      {"Outside the ranges of the rows used", V::Count(static_cast<std::int64_t>(holdout.rows_outside_ranges))},
      {"Leverage above the largest of the rows used", V::Count(static_cast<std::int64_t>(holdout.rows_high_leverage))},
  }});
  if (holdout.calibration.empty()) return;
  ReportTable table;
  table.caption = "Calibration: held-out rows by decile of prediction";
  table.columns = {{"decile", ValueKind::kCount}, {"rows", ValueKind::kCount},
                   {"mean predicted", ValueKind::kQuantity}, {"mean observed", ValueKind::kQuantity}};
  ReportChart chart;
  chart.id = "calibration-chart";
  chart.kind = ChartKind::kScatter;
  chart.title = "Calibration on the held-out rows";
  chart.x_label = "mean prediction in the decile";
  chart.y_label = "mean observed in the decile";
  chart.caption = "One point per decile of prediction; the dashed line is where observed equals predicted. Points "
                  "above it: the model prices those rows too low.";
  ChartSeries points{"deciles", false, true, {}, {}};
  double low = 0, high = 0;
  bool first = true;
  for (const CalibrationBin& bin : holdout.calibration) {
    table.rows.push_back({V::Count(static_cast<std::int64_t>(bin.decile)), V::Count(static_cast<std::int64_t>(bin.rows)),
                          V::Quantity(bin.mean_prediction), V::Quantity(bin.mean_observed)});
    ChartPoint point;
    point.x = bin.mean_prediction;
    point.y = bin.mean_observed;
    point.css_class = "calibration-point";
    point.title = "decile " + std::to_string(bin.decile) + ": predicted " + FormatQuantity(bin.mean_prediction) +
                  ", observed " + FormatQuantity(bin.mean_observed) + " (" +
                  FormatCount(static_cast<std::int64_t>(bin.rows)) + " rows)";
    points.points.push_back(std::move(point));
    for (const double value : {bin.mean_prediction, bin.mean_observed}) {
      low = first ? value : std::min(low, value);
      high = first ? value : std::max(high, value);
      first = false;
    }
  }
  ChartSeries identity{"observed = predicted", true, false, {}, "ref"};
  for (const double end : {low, high}) {
    ChartPoint point;
    point.x = end;
    point.y = end;
    identity.points.push_back(std::move(point));
  }
  chart.series.push_back(std::move(identity));
  chart.series.push_back(std::move(points));
  section.blocks.push_back(std::move(table));
  section.blocks.push_back(std::move(chart));
}

ChartPoint Bar(std::string label, double share, std::string css_class, std::string title) {
  ChartPoint point;
  point.x = share;
  point.label = std::move(label);
  point.css_class = std::move(css_class);
  point.value_text = FormatPercent(share);
  point.title = std::move(title);
  return point;
}

// A bar chart of shares of the bootstrap samples, on a 0 to 1 axis.
ReportChart ShareBars(std::string id, std::string title, std::string caption) {
  ReportChart chart;
  chart.id = std::move(id);
  chart.kind = ChartKind::kBars;
  chart.title = std::move(title);
  chart.x_label = "share of samples";
  chart.caption = std::move(caption);
  chart.x_include = {0, 1};
  return chart;
}

void BootstrapBlocks(const BootstrapValidation& bootstrap, const json& audit, ReportSection& section) {
  const double replicates = static_cast<double>(bootstrap.settings.replicates);
  const json& final_terms = Get(Get(audit, "model"), "terms");
  const auto in_final = [&final_terms](const std::string& term) {
    return std::any_of(final_terms.begin(), final_terms.end(), [&term](const json& entry) { return Text(entry) == term; });
  };
  section.blocks.push_back(ReportParagraph{
      "Stability: the plan's selection was rerun on " +
          FormatCount(static_cast<std::int64_t>(bootstrap.settings.replicates)) +
          " Poisson bootstrap samples of the rows (seed " + std::to_string(bootstrap.settings.seed) +
          "). The chosen model is " + (bootstrap.chosen_among_top ? "" : "not ") + "among the ten most frequent.",
      ""});

  ReportChart inclusion = ShareBars("inclusion-chart", "Share of bootstrap samples choosing each term",
                                    "Dark bars: terms of the final model. A term chosen in few samples is a weak finding.");
  ChartSeries bars{"inclusion", false, true, {}, {}};
  for (const TermInclusion& term : bootstrap.inclusion) {
    const bool chosen = in_final(term.term);
    bars.points.push_back(Bar(term.term, term.frequency, chosen ? "chosen" : "",
                              term.term + ": " + FormatPercent(term.frequency) + (chosen ? " (in the final model)" : "")));
  }
  inclusion.series.push_back(std::move(bars));
  section.blocks.push_back(std::move(inclusion));

  ReportChart sizes = ShareBars("size-chart", "Model size across the bootstrap samples",
                                "Terms in each sample's final model (the intercept not counted); dark: the chosen "
                                "model's size.");
  ChartSeries size_bars{"sizes", false, true, {}, {}};
  for (const SizeFrequency& size : bootstrap.sizes) {
    const double share = replicates > 0 ? static_cast<double>(size.replicates) / replicates : 0;
    const std::string label = std::to_string(size.size) + (size.size == 1 ? " term" : " terms");
    size_bars.points.push_back(Bar(label, share, final_terms.size() == size.size ? "chosen" : "",
                                   label + ": " + FormatCount(static_cast<std::int64_t>(size.replicates)) + " samples"));
  }
  sizes.series.push_back(std::move(size_bars));
  section.blocks.push_back(std::move(sizes));

  ReportTable models;
  models.caption = "The most frequent final models";
  models.columns = {{"share", ValueKind::kPercent}, {"terms", ValueKind::kText}};
  for (const ModelFrequency& model : bootstrap.models) {
    models.rows.push_back({V::Percent(model.frequency), V::Text(ModelTermsText(model.terms))});
    models.row_styles.push_back(model.chosen ? "chosen" : "");
  }
  section.blocks.push_back(std::move(models));

  // The bootstrap's percentile intervals beside the model-based interval of the final model.
  const json& coefficients = Get(Get(audit, "model"), "coefficients");
  const auto model_interval = [&coefficients](const std::string& name) -> std::pair<V, V> {
    for (const json& coefficient : coefficients) {
      if (Text(Get(coefficient, "name")) == name) {
        return {V::Quantity(Number(Get(coefficient, "ci_low")), kCriterionDigits),
                V::Quantity(Number(Get(coefficient, "ci_high")), kCriterionDigits)};
      }
    }
    return {V::Text("not in model"), V::Text("")};
  };
  ReportTable spread;
  spread.caption = "Coefficient intervals: bootstrap percentiles (over the samples holding the term, and over all "
                   "with 0 where left out) beside the model's interval, which ignores the selection";
  spread.columns = {{"coefficient", ValueKind::kText},        {"chosen in", ValueKind::kPercent},
                    {"when chosen: low", ValueKind::kQuantity}, {"high", ValueKind::kQuantity},
                    {"all samples: low", ValueKind::kQuantity}, {"high", ValueKind::kQuantity},
                    {"model: low", ValueKind::kQuantity},       {"high", ValueKind::kQuantity}};
  for (const CoefficientSpread& entry : bootstrap.coefficients) {
    const auto [model_low, model_high] = model_interval(entry.name);
    spread.rows.push_back({V::Text(entry.name), V::Percent(entry.inclusion),
                           entry.conditional ? V::Quantity(entry.conditional->first, kCriterionDigits) : V::Text("n/a"),
                           entry.conditional ? V::Quantity(entry.conditional->second, kCriterionDigits) : V::Text("n/a"),
                           V::Quantity(entry.unconditional.first, kCriterionDigits),
                           V::Quantity(entry.unconditional.second, kCriterionDigits), model_low, model_high});
  }
  spread.folded = spread.rows.size() > 20;
  section.blocks.push_back(std::move(spread));

  if (bootstrap.substitutes.empty()) return;
  ReportTable pairs;
  pairs.caption = "Terms that stand in for each other (rarely chosen together, often one without the other)";
  pairs.columns = {{"first", ValueKind::kText},      {"second", ValueKind::kText},
                   {"together", ValueKind::kPercent}, {"first only", ValueKind::kPercent},
                   {"second only", ValueKind::kPercent}, {"statistic", ValueKind::kQuantity}};
  for (const SubstitutePair& pair : bootstrap.substitutes) {
    pairs.rows.push_back({V::Text(pair.first), V::Text(pair.second), V::Percent(pair.together),
                          V::Percent(pair.first_only), V::Percent(pair.second_only), V::Quantity(pair.statistic, 3)});
  }
  section.blocks.push_back(std::move(pairs));
}

}  // namespace

std::optional<ReportSection> ValidationSection(const json& audit) {
  const json& recorded = Get(audit, "validation");
  if (recorded.is_null()) return std::nullopt;  // an audit made before validation existed
  const ValidationResult validation = ValidationFromJson(recorded, "audit");
  ReportSection section{"validation", "Validation", {}};
  FoldsBlocks(validation.folds, Get(audit, "model"), section);
  if (validation.holdout) HoldoutBlocks(*validation.holdout, section);
  if (validation.bootstrap) BootstrapBlocks(*validation.bootstrap, audit, section);
  return section;
}

}  // namespace stepledger::report_detail

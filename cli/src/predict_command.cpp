// `stepledger predict AUDIT ROWS [--out FILE] [--level P] [--id COL]`: prices new rows with the
// final model of an audit (rebuilt from the audit alone, audit/fitted_model.h), one output row
// per input row in input order, with intervals and extrapolation flags (engine/prediction.h).

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/cli/run_cli.h"

namespace stepledger::cli {
namespace {

struct PredictArgs {
  std::string audit;
  std::string rows;
  std::string out = "-";
  double level = 0.95;
  std::string id_column;
  bool allow_unverified = false;  ///< price with an audit whose digests do not hold (warned)
};

constexpr const char* kBackTransformMethod =
    "exp of the log-scale prediction and interval bounds (the median of the response under "
    "normal errors on the log scale, with intervals for the median and for a new response); "
    "mean = exp(prediction) x smearing factor (Duan's smearing estimate: the mean over the "
    "fitted rows of exp(sqrt(w_i) e_i))";

// Full round-trip precision: what scripts read must be the numbers computed.
std::string Number(double value) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}
std::string Number(const std::optional<double>& value) { return value ? Number(*value) : std::string(); }

// RFC 4180 quoting, only when needed.
std::string CsvText(std::string_view text) {
  if (text.find_first_of(",\"\r\n") == std::string_view::npos) return std::string(text);
  std::string quoted = "\"";
  for (const char c : text) {
    if (c == '"') quoted += '"';
    quoted += c;
  }
  return quoted + "\"";
}

nlohmann::json Json(const std::optional<double>& value) {
  if (!value || !std::isfinite(*value)) return nullptr;
  return *value;
}

struct Priced {
  PredictedRow row;
  std::string id;
};

std::string FlagsText(const PredictedRow& row) {
  std::string text;
  for (const PredictionFlag flag : row.flags) text += (text.empty() ? "" : ";") + std::string(ToString(flag));
  return text;
}

// With a logged response the price on the response's own scale comes first (what a reader
// wants), then the numbers on the log scale the model was fitted on.
std::string RenderCsv(const std::vector<Priced>& rows, bool with_id, bool logged) {
  std::ostringstream out;
  out << "row,line";
  if (with_id) out << ",id";
  if (logged) out << ",exp_prediction,exp_ci_low,exp_ci_high,exp_pi_low,exp_pi_high,mean_smearing";
  out << ",prediction,se_mean,ci_low,ci_high,pi_low,pi_high";
  out << ",leverage,flags,detail\n";
  for (const Priced& priced : rows) {
    const PredictedRow& row = priced.row;
    out << row.row_index + 1 << "," << row.line;
    if (with_id) out << "," << CsvText(priced.id);
    if (logged) {
      const auto& back = row.back;
      out << "," << (back ? Number(back->median) : "") << ","
          << (back && back->ci ? Number(back->ci->low) : "") << ","
          << (back && back->ci ? Number(back->ci->high) : "") << ","
          << (back && back->pi ? Number(back->pi->low) : "") << ","
          << (back && back->pi ? Number(back->pi->high) : "") << ","
          << (back ? Number(back->mean) : "");
    }
    out << "," << Number(row.prediction) << "," << Number(row.se_mean) << ","
        << (row.ci ? Number(row.ci->low) : "") << "," << (row.ci ? Number(row.ci->high) : "") << ","
        << (row.pi ? Number(row.pi->low) : "") << "," << (row.pi ? Number(row.pi->high) : "");
    out << "," << Number(row.leverage) << "," << FlagsText(row) << "," << CsvText(row.Detail()) << "\n";
  }
  return out.str();
}

nlohmann::json IntervalJson(const std::optional<PredictionInterval>& interval, bool low) {
  if (!interval) return nullptr;
  return Json(low ? interval->low : interval->high);
}

nlohmann::json RowJson(const Priced& priced, bool with_id) {
  const PredictedRow& row = priced.row;
  nlohmann::json json = {{"row", row.row_index + 1}, {"line", row.line}};
  if (with_id) json["id"] = priced.id;
  json["prediction"] = Json(row.prediction);
  json["se_mean"] = Json(row.se_mean);
  json["ci_low"] = IntervalJson(row.ci, true);
  json["ci_high"] = IntervalJson(row.ci, false);
  json["pi_low"] = IntervalJson(row.pi, true);
  json["pi_high"] = IntervalJson(row.pi, false);
  if (row.back) {
    json["back_transformed"] = {{"median", Json(row.back->median)},
                                {"ci_low", IntervalJson(row.back->ci, true)},
                                {"ci_high", IntervalJson(row.back->ci, false)},
                                {"pi_low", IntervalJson(row.back->pi, true)},
                                {"pi_high", IntervalJson(row.back->pi, false)},
                                {"mean", Json(row.back->mean)}};
  } else {
    json["back_transformed"] = nullptr;
  }
  json["leverage"] = Json(row.leverage);
  json["weight"] = row.weight;
  nlohmann::json flags = nlohmann::json::array();
  for (const PredictionFlag flag : row.flags) flags.push_back(ToString(flag));
  json["flags"] = std::move(flags);
  nlohmann::json outside = nlohmann::json::array();
  for (const OutsideRange& range : row.outside_range) {
    outside.push_back({{"column", range.column},
                       {"term", range.term},
                       {"kind", ToString(range.kind)},
                       {"value", Json(range.value)},
                       {"min", Json(range.min)},
                       {"max", Json(range.max)}});
  }
  json["outside_range"] = std::move(outside);
  nlohmann::json problems = nlohmann::json::array();
  for (const RowProblem& problem : row.problems) {
    problems.push_back({{"flag", ToString(problem.flag)},
                        {"column", problem.column},
                        {"term", problem.term.empty() ? nlohmann::json(nullptr) : nlohmann::json(problem.term)},
                        {"text", problem.text},
                        {"where", problem.where},
                        {"reason", problem.reason}});
  }
  json["problems"] = std::move(problems);
  json["detail"] = row.Detail();
  return json;
}

// Whether the audit may be used to price. An empty warning when its digests hold; the warning
// to show everywhere when they do not and --allow-unverified was given; nullopt, after saying
// why on the error stream, when they do not and it was not.
std::optional<std::string> CheckAuditForPricing(const nlohmann::json& document, const PredictArgs& args,
                                                CommandContext& context) {
  // Prices from an edited audit would look as trustworthy as any: refuse unless asked.
  std::string unverified_warning;
  if (const VerifyReport integrity = CheckAuditIntegrity(document); !integrity.Holds()) {
    const std::string problem = integrity.problems.empty() ? "digests do not hold" : integrity.problems.front();
    if (!args.allow_unverified) {
      context.err << "stepledger: " << args.audit << " does not verify (" << OneLineText(problem)
                  << "): its coefficients may have been edited; run '" << ProgramWord() << " verify " << args.audit
                  << "' for the details, or add --allow-unverified to price with it anyway\n";
      return std::nullopt;
    }
    unverified_warning = "warning: " + args.audit + " does not verify (" + OneLineText(problem) +
                         "); these prices come from an audit whose digests do not hold (--allow-unverified)";
  }
  return unverified_warning;
}

// The rows priced in input order, with the counts the summary reports.
struct PricedRows {
  std::vector<Priced> rows;
  bool with_id = false;       ///< --id named a column; each row carries its text
  bool weights_read = false;  ///< the rows file's weight column was read
  std::size_t priced_count = 0;
  std::map<PredictionFlag, std::size_t> flag_counts;
};

PricedRows PriceRows(const PredictArgs& args, CommandContext& context, const FittedModel& fitted,
                     const Predictor& predictor) {
  CsvOptions csv = MakeCsvOptions(context.common);
  csv.missing_tokens = fitted.missing_tokens;
  CsvReader reader(args.rows, csv);
  std::ptrdiff_t id_index = -1;
  if (!args.id_column.empty()) {
    id_index = reader.ColumnIndex(args.id_column);
    if (id_index < 0) {
      throw InputError(args.rows + ": no column '" + QuoteForMessage(args.id_column) +
                       "' in the header (named by --id)");
    }
  }
  const PredictionRowEvaluator evaluator(predictor.design(), reader);
  PricedRows priced_rows;
  priced_rows.with_id = id_index >= 0;
  priced_rows.weights_read = evaluator.reads_weights();

  CsvRecord record;
  while (reader.Next(record)) {
    Priced priced{predictor.Predict(evaluator.Evaluate(record)), {}};
    if (priced_rows.with_id) priced.id = std::string(record.fields[static_cast<std::size_t>(id_index)].text);
    priced_rows.rows.push_back(std::move(priced));
  }

  for (const Priced& priced : priced_rows.rows) {
    if (priced.row.priced()) ++priced_rows.priced_count;
    for (const PredictionFlag flag : priced.row.flags) ++priced_rows.flag_counts[flag];
  }
  return priced_rows;
}

// The whole output (JSON document, or CSV with the warning as a leading comment line).
std::string RenderPredictOutput(const PredictArgs& args, CommandContext& context, const FittedModel& fitted,
                                const Predictor& predictor, PricedRows& priced_rows,
                                const std::string& unverified_warning) {
  const std::vector<Priced>& rows = priced_rows.rows;
  const bool with_id = priced_rows.with_id;
  const bool logged = predictor.design().response_transform == ResponseTransform::kLog;
  std::string text;
  if (context.common.json) {
    nlohmann::json result;
    result["warning"] = unverified_warning.empty() ? nlohmann::json(nullptr) : nlohmann::json(unverified_warning);
    result["audit"] = args.audit;
    result["model_statement"] = ModelStatement(fitted.design, fitted.fit);
    result["rows_file"] = args.rows;
    result["level"] = args.level;
    result["response"] = predictor.design().response;
    result["response_transform"] = ToString(predictor.design().response_transform);
    result["back_transform_method"] = logged ? nlohmann::json(kBackTransformMethod) : nlohmann::json(nullptr);
    result["smearing_factor"] = Json(fitted.support.smearing_factor);
    result["sigma"] = Json(fitted.fit.criteria.sigma);
    result["df_residual"] = fitted.fit.df_residual;
    result["t_quantile"] = Json(predictor.t_quantile());
    result["max_unit_leverage"] = Json(fitted.support.max_unit_leverage);
    result["weights"] = predictor.design().weights ? nlohmann::json(*predictor.design().weights) : nlohmann::json(nullptr);
    result["weights_read"] = priced_rows.weights_read;
    nlohmann::json json_rows = nlohmann::json::array();
    for (const Priced& priced : rows) json_rows.push_back(RowJson(priced, with_id));
    result["rows"] = std::move(json_rows);
    nlohmann::json flag_counts = nlohmann::json::object();
    // operator[] on the map: a flag no row carries counts 0 (and is then present in the map).
    for (const PredictionFlag flag : kAllPredictionFlags) flag_counts[ToString(flag)] = priced_rows.flag_counts[flag];
    result["summary"] = {{"rows", rows.size()}, {"priced", priced_rows.priced_count}, {"flags", std::move(flag_counts)}};
    text = result.dump(2) + "\n";
  } else {
    text = RenderCsv(rows, with_id, logged);
    if (!unverified_warning.empty()) text = "# " + unverified_warning + "\n" + text;
  }
  return text;
}

// The model and the counts on the error stream, unless --quiet.
void ReportPredictSummary(CommandContext& context, const FittedModel& fitted, const Predictor& predictor,
                          PricedRows& priced_rows) {
  if (context.common.quiet) return;
  const bool logged = predictor.design().response_transform == ResponseTransform::kLog;
  context.err << "predict: model " << ModelStatement(fitted.design, fitted.fit) << "\n";
  std::string summary = "predict: " + std::to_string(priced_rows.rows.size()) + " rows, " +
                        std::to_string(priced_rows.priced_count) + " priced";
  bool first = true;
  for (const PredictionFlag flag : {PredictionFlag::kOutsideRange, PredictionFlag::kHiddenExtrapolation,
                                    PredictionFlag::kUnknownLevel, PredictionFlag::kMissing,
                                    PredictionFlag::kInvalidValue}) {
    summary += (first ? "; " : ", ") + std::string(ToString(flag)) + " " +
               std::to_string(priced_rows.flag_counts[flag]);
    first = false;
  }
  context.err << summary << "\n";
  if (logged && !context.common.json) {
    context.err << "predict: response '" << predictor.design().response
                << "' was logged: the exp_ columns (first) are the price on its own scale (exp "
                   "of the log-scale prediction: the median, and its intervals); prediction, "
                   "se_mean and the intervals after them are on the log scale; mean_smearing = "
                   "exp_prediction x "
                << Number(fitted.support.smearing_factor) << " (smearing factor)\n";
  }
}

int RunPredict(const PredictArgs& args, CommandContext& context) {
  if (!(args.level > 0 && args.level < 1)) {
    throw InputError("--level: expected a number strictly between 0 and 1, found " + Number(args.level));
  }
  const nlohmann::json document = ReadAuditFile(args.audit);
  const std::optional<std::string> unverified_warning = CheckAuditForPricing(document, args, context);
  if (!unverified_warning) return static_cast<int>(ExitStatus::kDifferenceFound);
  const FittedModel fitted = FittedModelFromAudit(document, args.audit);
  PredictionOptions options;
  options.level = args.level;
  const Predictor predictor(MakePricingModel(fitted), options);

  PricedRows priced_rows = PriceRows(args, context, fitted, predictor);

  const std::string text =
      RenderPredictOutput(args, context, fitted, predictor, priced_rows, *unverified_warning);
  if (!unverified_warning->empty()) context.err << "stepledger: " << *unverified_warning << "\n";
  WriteOutput(context, args.out, text);
  ReportPredictSummary(context, fitted, predictor, priced_rows);
  return 0;
}

}  // namespace

void AddPredictCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<PredictArgs>();
  CLI::App* command = app.add_subcommand(
      "predict",
      "Prices new rows with the final model of an audit: one output row per input row, in input "
      "order, with the prediction, its standard error, a confidence interval for the mean, a "
      "prediction interval for one new observation, the leverage and flags that say when a "
      "row is an extrapolation or cannot be priced. The model is rebuilt from the audit alone; "
      "ROWS needs only the columns of the model's terms (not the response, not the candidates "
      "the selection left out).");
  command->add_option("AUDIT", args->audit, "Audit file (audit.json) written by select or rerun")->required();
  command->add_option("ROWS", args->rows, "CSV file of rows to price (header row first)")
      ->required()
      ->check(CLI::ExistingFile);
  command->add_option("--out", args->out, "Write the result to FILE (atomically; --force to overwrite) instead of stdout")
      ->type_name("FILE");
  command->add_option("--level", args->level, "Level of the confidence and prediction intervals, in (0, 1); default 0.95")
      ->type_name("P");
  command->add_option("--id", args->id_column, "Column of ROWS whose text is copied to each output row as its id")
      ->type_name("COL");
  command->add_flag("--allow-unverified", args->allow_unverified,
                    "Price even when the audit's digests do not hold (else exit 1); the warning "
                    "is then the first line of the output");
  AddCommonOptions(*command, context.common, kAllCommonOptions & ~kThreadsOption);
  command->footer(
      "The audit must verify (its digests and seal hold, as `stepledger verify` checks): an "
      "edited audit is refused with exit 1 unless --allow-unverified, and then the output's first "
      "line (a '# warning: ...' line in CSV, the key warning in JSON) and stderr say so.\n"
      "Output (CSV; --json gives the same as {warning, model_statement, level, response, "
      "response_transform, back_transform_method, rows: [...], summary}):\n"
      "  row, line        data row (1-based) and line of the input row\n"
      "  id               the --id column's text (only with --id)\n"
      "  exp_*            with a logged response only, first: exp of prediction and bounds (the\n"
      "                   price on the response's own scale: the median, and its intervals)\n"
      "  mean_smearing    with a logged response only: exp(prediction) x the smearing factor\n"
      "                   (mean over the fitted rows of exp(sqrt(w) e)), an estimate of the mean\n"
      "  prediction       x0'b on the scale the model was fitted on\n"
      "  se_mean          standard error of the mean at x0: sigma sqrt(h0)\n"
      "  ci_low, ci_high  confidence interval for the mean (Student t on the residual df)\n"
      "  pi_low, pi_high  prediction interval for one new observation: sigma sqrt(1/w0 + h0),\n"
      "                   w0 the row's value of the plan's weights column when ROWS has it\n"
      "                   (empty or NA: 1), else 1\n"
      "  leverage         h0 = x0'(X'WX)^-1 x0, the leverage at unit weight\n"
      "  flags, detail    ';'-separated flags, and what they mean for this row\n"
      "Flags:\n"
      "  outside-range         some column lies outside its range over the fitted rows (each\n"
      "                        such column is named with its value and range; for a log term the\n"
      "                        range is shown on the column's own scale)\n"
      "  hidden-extrapolation  every column is in range, but the leverage is above the largest\n"
      "                        among the fitted rows: the combination is far from the data\n"
      "  unknown-level         a level the fitted data did not have (no prediction)\n"
      "  missing               an empty or NA cell in a needed column (no prediction)\n"
      "  invalid-value         text or a non-finite number in a numeric column, a value <= 0\n"
      "                        under a log, a weight that is not positive (no prediction)\n"
      "A row with a problem is still written (without numbers); a summary line on stderr counts "
      "the rows, the priced ones and each flag. Predictions outside the data are extrapolations; "
      "intervals of a selected model ignore the selection and are optimistic.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n"
      "  " + ProgramWord() + " predict build/demo/audit.json build/demo/laptops_to_price.csv --id listing_id "
      "--out build/demo/priced.csv --force");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunPredict(*args, context); };
  });
}

}  // namespace stepledger::cli

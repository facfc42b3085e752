// `stepledger predict AUDIT ROWS [--out FILE] [--level P] [--id COL]`: prices new rows with the
// final model of an audit (rebuilt from the audit alone, audit/fitted_model.h), one output row
// per input row in input order, with intervals and extrapolation flags (engine/prediction.h).
// It streams: each row is read, priced and written before the next is read, so memory stays
// flat in the rows (the output goes through one buffer to stdout, or to a temporary file
// beside --out that takes the name at the end), and the summary counts come last.

#include <array>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/audit/prediction_json.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/engine/utf8.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/io/atomic_file.h"

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

// The shortest text that reads back to the same double (std::to_chars without a precision):
// what scripts read is exactly the number computed, in as few digits as that takes.
void AppendNumber(std::string& text, double value) {
  std::array<char, 32> buffer;  // the longest shortest form, "-2.2250738585072014e-308", is 24
  const auto result = std::to_chars(buffer.data(), buffer.data() + buffer.size(), value);
  text.append(buffer.data(), result.ptr);
}
void AppendNumber(std::string& text, const std::optional<double>& value) {
  if (value) AppendNumber(text, *value);
}
std::string Number(const std::optional<double>& value) {
  std::string text;
  AppendNumber(text, value);
  return text;
}

// RFC 4180 quoting, only when needed.
void AppendCsvText(std::string& out, std::string_view text) {
  if (text.find_first_of(",\"\r\n") == std::string_view::npos) {
    out += text;
    return;
  }
  out += '"';
  for (const char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
}

nlohmann::json Json(const std::optional<double>& value) {
  if (!value || !std::isfinite(*value)) return nullptr;
  return *value;
}

struct Priced {
  PredictedRow row;
  std::string id;
};

// With a logged response the price on the response's own scale comes first (what a reader
// wants), then the numbers on the log scale the model was fitted on.
std::string CsvHeader(bool with_id, bool logged) {
  std::string header = "row,line";
  if (with_id) header += ",id";
  if (logged) header += ",exp_prediction,exp_ci_low,exp_ci_high,exp_pi_low,exp_pi_high,mean_smearing";
  header += ",prediction,se_mean,ci_low,ci_high,pi_low,pi_high";
  header += ",leverage,flags,detail\n";
  return header;
}

// One CSV line, appended to out.
void AppendCsvRow(std::string& out, const Priced& priced, bool with_id, bool logged) {
  const PredictedRow& row = priced.row;
  auto number = [&](const std::optional<double>& value) {
    out += ',';
    AppendNumber(out, value);
  };
  auto bound = [&](const std::optional<PredictionInterval>& interval, bool low) {
    number(interval ? std::optional<double>(low ? interval->low : interval->high) : std::nullopt);
  };
  out += std::to_string(row.row_index + 1);
  out += ',';
  out += std::to_string(row.line);
  if (with_id) {
    out += ',';
    AppendCsvText(out, priced.id);
  }
  if (logged) {
    const auto& back = row.back;
    number(back ? std::optional<double>(back->median) : std::nullopt);
    bound(back ? back->ci : std::nullopt, true);
    bound(back ? back->ci : std::nullopt, false);
    bound(back ? back->pi : std::nullopt, true);
    bound(back ? back->pi : std::nullopt, false);
    number(back ? back->mean : std::nullopt);
  }
  number(row.prediction);
  number(row.se_mean);
  bound(row.ci, true);
  bound(row.ci, false);
  bound(row.pi, true);
  bound(row.pi, false);
  number(row.leverage);
  out += ',';
  bool first = true;
  for (const PredictionFlag flag : row.flags) {
    if (!first) out += ';';
    out += ToString(flag);
    first = false;
  }
  out += ',';
  AppendCsvText(out, row.Detail());
  out += '\n';
}

nlohmann::json RowJson(const Priced& priced, bool with_id) {
  return PredictedRowJson(priced.row, with_id ? &priced.id : nullptr);
}

// Whether the audit may be used to price. An empty warning when its digests hold; the warning
// to show everywhere when they do not and --allow-unverified was given; nullopt, after saying
// why on the error stream, when they do not and it was not.
std::optional<std::string> CheckAuditForPricing(const nlohmann::json& document, const PredictArgs& args,
                                                CommandContext& context) {
  // Prices from an edited audit would look as trustworthy as any: refuse unless asked.
  std::string unverified_warning;
  if (const VerifyReport integrity = CheckAuditIntegrity(document, {}, context.common.limits); !integrity.Holds()) {
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

// Where the output goes, as it is produced: stdout, or a temporary file beside --out that
// takes its name only in Finish() (an exception before that removes it). Text is collected in
// one buffer of kFlushBytes, so memory does not grow with the rows.
class PredictSink {
 public:
  static constexpr std::size_t kFlushBytes = std::size_t{1} << 16;

  PredictSink(CommandContext& context, const std::string& path) : context_(context) {
    if (path != "-") {
      file_ = std::make_unique<AtomicFileWriter>(path, AtomicWriteOptions{.overwrite = context.common.force});
      path_ = path;
    }
    buffer_.reserve(kFlushBytes * 2);
  }
  /// The buffer to append to; call MaybeFlush() after appending.
  std::string& buffer() { return buffer_; }
  void MaybeFlush() {
    if (buffer_.size() >= kFlushBytes) Flush();
  }
  void Finish() {
    Flush();
    if (file_) {
      file_->Commit();
      if (context_.log) context_.log->info("wrote {}", path_);
    } else {
      context_.out.flush();
    }
  }

 private:
  void Flush() {
    if (file_) {
      file_->Write(buffer_);
    } else {
      context_.out.write(buffer_.data(), static_cast<std::streamsize>(buffer_.size()));
      // A full disk or a closed reader: stop at once rather than price rows no one receives.
      if (!context_.out) throw InputError("stdout: cannot write the prices (output closed or disk full)");
    }
    buffer_.clear();
  }
  CommandContext& context_;
  std::unique_ptr<AtomicFileWriter> file_;
  std::string path_;
  std::string buffer_;
};

// Counts for the summary, kept while the rows stream past.
struct PredictCounts {
  bool with_id = false;       ///< --id named a column; each row carries its text
  bool weights_read = false;  ///< the rows file's weight column was read
  std::uint64_t rows = 0;
  std::uint64_t priced = 0;
  std::array<std::uint64_t, kAllPredictionFlags.size()> flags{};
  std::uint64_t& Flag(PredictionFlag flag) {
    std::size_t index = 0;
    while (kAllPredictionFlags[index] != flag) ++index;
    return flags[index];
  }
};

// The JSON document is written as nlohmann::json would dump it whole (keys sorted, indent 2):
// the keys before "rows", each row as it is priced, then the keys after it with the summary.
// `head` and `tail` are objects; their dumps are spliced around the rows.
std::string JsonHead(const nlohmann::json& head) {
  std::string text = JsonText(head);
  text.resize(text.size() - 2);  // drop "\n}"
  return text + ",\n  \"rows\": [";
}
void AppendJsonRow(std::string& out, const nlohmann::json& row, bool first) {
  out += first ? "\n    " : ",\n    ";
  // Indent the row's own lines by 4 more (JSON strings hold no raw line breaks).
  for (const char c : JsonText(row)) {
    out += c;
    if (c == '\n') out += "    ";
  }
}
std::string JsonTail(const nlohmann::json& tail, bool any_row) {
  std::string text = JsonText(tail);
  return std::string(any_row ? "\n  ]," : "],") + text.substr(1) + "\n";
}

// Reads, prices and writes the rows one at a time; returns the counts.
PredictCounts StreamPredictions(const PredictArgs& args, CommandContext& context, const FittedModel& fitted,
                                const Predictor& predictor, const std::string& unverified_warning) {
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
  PredictCounts counts;
  counts.with_id = id_index >= 0;
  counts.weights_read = evaluator.reads_weights();
  const bool logged = predictor.design().response_transform == ResponseTransform::kLog;
  const Design& design = predictor.design();

  // Every check on the header is done: only now is the output (and --out's clash) opened.
  PredictSink sink(context, args.out);
  std::string& out = sink.buffer();
  if (context.common.json) {
    nlohmann::json head;
    head["audit"] = args.audit;
    head["back_transform_method"] = logged ? nlohmann::json(kBackTransformMethod) : nlohmann::json(nullptr);
    head["df_residual"] = fitted.fit.df_residual;
    head["level"] = args.level;
    head["max_unit_leverage"] = Json(fitted.support.max_unit_leverage);
    head["model_statement"] = ModelStatement(fitted.design, fitted.fit);
    head["response"] = design.response;
    head["response_transform"] = ToString(design.response_transform);
    out += JsonHead(head);
  } else {
    if (!unverified_warning.empty()) out += "# " + unverified_warning + "\n";
    out += CsvHeader(counts.with_id, logged);
  }

  CsvRecord record;
  Priced priced;
  while (reader.Next(record)) {
    priced.row = predictor.Predict(evaluator.Evaluate(record));
    if (counts.with_id) {
      const CsvField& id = record.fields[static_cast<std::size_t>(id_index)];
      // An id is a key to join the prices on: JSON cannot carry one that is not UTF-8, and a
      // replaced one would no longer match its row.
      if (context.common.json && FirstInvalidUtf8(id.text)) {
        throw InputError(reader.Where(id) + ": the --id column '" + QuoteForMessage(args.id_column) +
                         "' holds text that is not UTF-8 (" + DescribeInvalidUtf8(id.text) +
                         " of the cell), which JSON cannot carry; convert the file to UTF-8, or write CSV");
      }
      priced.id.assign(id.text);
    }
    if (context.common.json) {
      AppendJsonRow(out, RowJson(priced, counts.with_id), counts.rows == 0);
    } else {
      AppendCsvRow(out, priced, counts.with_id, logged);
    }
    ++counts.rows;
    if (priced.row.priced()) ++counts.priced;
    for (const PredictionFlag flag : priced.row.flags) ++counts.Flag(flag);
    sink.MaybeFlush();
  }

  if (context.common.json) {
    nlohmann::json tail;
    tail["rows_file"] = args.rows;
    tail["sigma"] = Json(fitted.fit.criteria.sigma);
    tail["smearing_factor"] = Json(fitted.support.smearing_factor);
    nlohmann::json flag_counts = nlohmann::json::object();
    for (const PredictionFlag flag : kAllPredictionFlags) flag_counts[ToString(flag)] = counts.Flag(flag);
    tail["summary"] = {{"rows", counts.rows}, {"priced", counts.priced}, {"flags", std::move(flag_counts)}};
    tail["t_quantile"] = Json(predictor.t_quantile());
    tail["warning"] = unverified_warning.empty() ? nlohmann::json(nullptr) : nlohmann::json(unverified_warning);
    tail["weights"] = design.weights ? nlohmann::json(*design.weights) : nlohmann::json(nullptr);
    tail["weights_read"] = counts.weights_read;
    out += JsonTail(tail, counts.rows > 0);
  }
  sink.Finish();
  return counts;
}

// The model and the counts on the error stream, unless --quiet.
void ReportPredictSummary(CommandContext& context, const FittedModel& fitted, const Predictor& predictor,
                          PredictCounts& counts) {
  if (context.common.quiet) return;
  const bool logged = predictor.design().response_transform == ResponseTransform::kLog;
  context.err << "predict: model " << ModelStatement(fitted.design, fitted.fit) << "\n";
  std::string summary = "predict: " + std::to_string(counts.rows) + " rows, " +
                        std::to_string(counts.priced) + " priced";
  bool first = true;
  for (const PredictionFlag flag : {PredictionFlag::kOutsideRange, PredictionFlag::kHiddenExtrapolation,
                                    PredictionFlag::kUnknownLevel, PredictionFlag::kMissing,
                                    PredictionFlag::kInvalidValue}) {
    summary += (first ? "; " : ", ") + std::string(ToString(flag)) + " " +
               std::to_string(counts.Flag(flag));
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
  // An audit that cannot be read (a key missing or of the wrong type) is bad input, exit 2,
  // whether or not its digests hold; one that reads but does not verify is refused, exit 1.
  const FittedModel fitted = FittedModelFromAudit(document, args.audit, context.common.limits);
  const std::optional<std::string> unverified_warning = CheckAuditForPricing(document, args, context);
  if (!unverified_warning) return static_cast<int>(ExitStatus::kDifferenceFound);
  PredictionOptions options;
  options.level = args.level;
  const Predictor predictor(MakePricingModel(fitted), options);

  if (!unverified_warning->empty()) context.err << "stepledger: " << *unverified_warning << "\n";
  PredictCounts counts = StreamPredictions(args, context, fitted, predictor, *unverified_warning);
  ReportPredictSummary(context, fitted, predictor, counts);
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
      ->check(kExistingInputFile);
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
      "                        under a log, a weight that is not positive, or a value so far\n"
      "                        out that a number of the row would overflow (no prediction)\n"
      "A row with a problem is still written (without numbers); a summary line on stderr counts "
      "the rows, the priced ones and each flag. Numbers are written in the shortest form that "
      "reads back to the same double. Rows are read, priced and written one at a time, so memory "
      "does not grow with ROWS; with --out the file takes its name only when complete (nothing "
      "on an error), while on stdout an error in ROWS ends the output after the rows before it. "
      "Predictions outside the data are extrapolations; "
      "intervals of a selected model ignore the selection and are optimistic.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n"
      "  " + ProgramWord() + " predict build/demo/audit.json build/demo/laptops_to_price.csv --id listing_id "
      "--out build/demo/priced.csv --force");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunPredict(*args, context); };
  });
}

}  // namespace stepledger::cli

// `stepledger report AUDIT [--html FILE] [--text] [--json] [--data DATA [--rows-out FILE]]
// [--allow-unverified]`: renders an audit for a reviewer from one report model — plain text on
// stdout (default), one self-contained HTML file, the model as JSON, or several; with the
// audited data, the diagnostics of the final model too. An audit whose digests do not hold is
// refused (exit 1) unless --allow-unverified, which puts a warning first in every output.

#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/report/report.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/errors.h"

namespace stepledger::cli {
namespace {

struct ReportArgs {
  std::string audit;
  std::string html;   ///< --html FILE ("-": stdout)
  bool text = false;  ///< --text: also (or only) the text report on stdout
  std::vector<std::string> data;   ///< --data DATA: adds the diagnostics (a file, or a data set)
  std::string rows_out;  ///< --rows-out FILE: every row that stands out, as CSV (needs --data)
  bool allow_unverified = false;  ///< render an audit whose digests do not hold, with a warning
  std::string title;
};

int RunReport(const ReportArgs& args, CommandContext& context) {
  const nlohmann::json audit = ReadAuditFile(args.audit);
  const std::string audit_name = std::filesystem::path(args.audit).filename().string();
  if (!args.rows_out.empty() && args.data.empty()) {
    throw InputError("--rows-out " + args.rows_out + ": needs --data DATA (the rows come from one pass over the data)");
  }
  ReportOptions options;
  options.title = args.title;
  // A report of an edited audit would present the edited numbers as the run's: refuse it
  // unless the reader asked for it, and then say so before anything else.
  const VerifyReport integrity = CheckAuditIntegrity(audit, {}, context.common.limits);
  if (!integrity.Holds()) {
    if (!args.allow_unverified) {
      context.err << "stepledger: " << args.audit << ": the audit does not verify (" << integrity.problems.front()
                  << "); refusing to render it. `" << ProgramWord() << " verify " << args.audit
                  << "` lists every problem; --allow-unverified renders it anyway, with a warning at the top\n";
      return static_cast<int>(ExitStatus::kDifferenceFound);
    }
    options.integrity_problems = integrity.problems;
    if (context.log) context.log->warn("{}: the audit does not verify; rendering it with a warning", args.audit);
  }
  const bool write_text = args.text || (args.html.empty() && !context.common.json);
  const int stdout_users = (write_text ? 1 : 0) + (context.common.json ? 1 : 0) + (args.html == "-" ? 1 : 0);
  if (stdout_users > 1) {
    throw InputError("only one of --text, --json and --html - can use stdout; give --html a file name or drop "
                     "--text/--json");
  }
  // --rows-out grows with the rows, so it is written during the pass into a temporary file
  // beside the target; it takes its name only after everything else has rendered, and a
  // failure before then removes it (no file half-written or left behind).
  std::optional<AtomicFileWriter> rows_out;
  if (!args.rows_out.empty()) {
    rows_out.emplace(args.rows_out, AtomicWriteOptions{.overwrite = context.common.force});
  }
  std::optional<ReportDiagnostics> diagnostics;
  if (!args.data.empty()) {
    if (context.log) context.log->info("diagnosing the final model on {}", DataInputsText(args.data));
    std::function<void(std::string_view)> stand_out_csv;
    if (rows_out) stand_out_csv = [&rows_out](std::string_view text) { rows_out->Write(text); };
    diagnostics = DiagnoseAuditRows(audit, MakeDataSet(args.data), audit_name, stand_out_csv, MakeDataReadOptions(context.common));
  }
  const ReportDiagnostics* diagnostics_pointer = diagnostics ? &*diagnostics : nullptr;
  // Build once, render everything before writing anything: a failure leaves no file behind.
  const ReportModel model = BuildReportModel(audit, diagnostics_pointer, options);
  const std::string html = args.html.empty() ? "" : RenderHtmlReport(model, options.chart_width);
  const std::string text = write_text ? RenderTextReport(model) : "";
  if (!args.html.empty()) WriteOutput(context, args.html, html);
  if (rows_out) {
    rows_out->Commit();
    if (context.log) context.log->info("wrote {}", args.rows_out);
  }
  if (context.common.json) {
    context.out << JsonText(RenderJsonReport(model)) << "\n";
  } else if (write_text) {
    context.out << text;
  }
  return static_cast<int>(ExitStatus::kDone);
}

}  // namespace

void AddReportCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<ReportArgs>();
  CLI::App* command = app.add_subcommand(
      "report",
      "Renders an audit for a reviewer. Sections: a summary; the cautions of this run; the plan in "
      "words (method, criterion, thresholds, hierarchy, kept and excluded terms, response and "
      "transform, weights); the data and row accounting (file, SHA-256, rows read, used and "
      "dropped by reason, columns); the route (every step with the rule that decided it, and a "
      "chart of the criterion by step); the candidates scored at each step (a dot chart per step, "
      "ineligible ones greyed with their reason); for all-subsets, the best criterion by model "
      "size; the final model (coefficients, confidence intervals, the F test, ANOVA); diagnostics "
      "(Cook's distance by line number with the 4/n line, residuals against fitted values as a "
      "density, a histogram of standardised residuals with the normal curve, their quantiles "
      "against the normal's, and the rows that stand out, largest Cook's distance first; needs "
      "--data); validation and stability when "
      "the audit has them; integrity (seal, signature, parent, tool). The text, HTML and JSON "
      "outputs render one report model, so they show the same text for the same number. "
      "Without --html or --json the text report goes to stdout; with --html FILE the HTML "
      "report is written atomically (refusing to overwrite without --force). An audit whose "
      "digests do not hold is refused with exit 1 unless --allow-unverified.");
  command->add_option("AUDIT", args->audit, "Audit file (audit.json)")->required()->check(kExistingInputFile);
  command->add_option("--html", args->html,
                      "Write the self-contained HTML report to FILE ('-': stdout)")
      ->type_name("FILE");
  command->add_flag("--text", args->text, "Print the text report on stdout (the default without --html or --json)");
  command->add_option("--data", args->data,
                      "The audited data file (or a data set's files, in the recorded order, or its folder): "
                      "checks its SHA-256 against the audit, then adds the diagnostics of the final model "
                      "(one pass over the rows)")
      ->expected(1, -1)
      ->check(kExistingDataInput)
      ->type_name("DATA");
  command->add_option("--rows-out", args->rows_out,
                      "With --data: write every row that stands out, in file order, "
                      "as CSV (line, fitted, residual, standardized_residual, leverage, "
                      "cooks_distance, reasons; full precision) to FILE, atomically")
      ->type_name("FILE");
  command->add_flag("--allow-unverified", args->allow_unverified,
                    "Render an audit whose digests do not hold (refused otherwise, exit 1); every "
                    "output then opens with a warning naming the problems");
  command->add_option("--title", args->title, "Heading of the report (default: 'Selection report: DATA')")
      ->type_name("TEXT");
  AddCommonOptions(*command, context.common);
  command->get_option("--limit")->needs(command->get_option("--data"));
  const std::string program = ProgramWord();
  command->footer(
      "The report renders from the audit alone (and, with --data, one pass over the data that "
      "the audit's fingerprint identifies; a different file is refused with exit 2). The HTML "
      "file has no scripts and fetches nothing: it reads the same offline, printed, or on a "
      "phone. `select --out DIR` writes DIR/report.html with the diagnostics already in it. "
      "With --json: the report model itself (sections, facts, tables whose cells carry "
      "{text, number, kind} with the number at full precision, chart series) instead of the "
      "text; \"verified\": false and \"warning\" when rendered with --allow-unverified.\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExamples:\n"
      "  " + program + " report build/demo/audit.json\n"
      "  " + program + " report build/demo/audit.json --data build/demo/laptops.csv "
      "--html build/demo/review.html --force\n"
      "  " + program + " report build/demo/audit.json --html build/demo/review.html --text --force\n"
      "  " + program + " report build/demo/audit.json --data build/demo/laptops.csv "
      "--rows-out build/demo/rows.csv --force\n"
      "  " + program + " report build/demo/audit.json --json");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunReport(*args, context); };
  });
}

}  // namespace stepledger::cli

// `stepledger report AUDIT [--html FILE] [--text] [--data DATA]`: renders an audit for a
// reviewer: plain text on stdout (default), one self-contained HTML file, or both; with the
// audited data, the diagnostics of the final model too.

#include <memory>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/errors.h"

namespace stepledger::cli {
namespace {

struct ReportArgs {
  std::string audit;
  std::string html;   ///< --html FILE ("-": stdout)
  bool text = false;  ///< --text: also (or only) the text report on stdout
  std::string data;   ///< --data DATA: adds the diagnostics
  std::string title;
};

int RunReport(const ReportArgs& args, CommandContext& context) {
  const nlohmann::json audit = ReadAuditFile(args.audit);
  const std::string audit_name = std::filesystem::path(args.audit).filename().string();
  std::optional<ReportDiagnostics> diagnostics;
  if (!args.data.empty()) {
    if (context.log) context.log->info("diagnosing the final model on {}", args.data);
    diagnostics = DiagnoseAuditRows(audit, args.data, audit_name);
  }
  ReportOptions options;
  options.title = args.title;
  const ReportDiagnostics* diagnostics_pointer = diagnostics ? &*diagnostics : nullptr;
  const bool write_text = args.text || args.html.empty();
  if (args.html == "-" && write_text && !context.common.json) {
    throw InputError("--html -: stdout already carries the text report; give --html a file name or drop --text");
  }
  // Render everything before writing anything: a failure leaves no file behind.
  const std::string html = args.html.empty() ? "" : RenderHtmlReport(audit, diagnostics_pointer, options);
  const std::string text = write_text ? RenderTextReport(audit, diagnostics_pointer, options) : "";
  if (!args.html.empty()) WriteOutput(context, args.html, html);
  if (context.common.json) {
    nlohmann::json result{{"audit", args.audit},
                          {"seal", audit.value("seal", "")},
                          {"html", args.html.empty() ? nlohmann::json(nullptr) : nlohmann::json(args.html)},
                          {"diagnostics", diagnostics.has_value()}};
    if (diagnostics) result["rows_diagnosed"] = diagnostics->result.rows.size();
    context.out << result.dump(2) << "\n";
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
      "size; the final model (coefficients, confidence intervals, ANOVA); diagnostics (residuals "
      "against fitted values, a normal quantile plot, leverage against standardised residual "
      "with Cook's distance contours, and the rows that stand out; needs --data); validation and "
      "stability when the audit has them; integrity (seal, signature, parent, tool). Without "
      "--html the text report goes to stdout; with --html FILE the HTML report is written "
      "atomically (refusing to overwrite without --force) and nothing is printed unless --text "
      "is given too.");
  command->add_option("AUDIT", args->audit, "Audit file (audit.json)")->required()->check(CLI::ExistingFile);
  command->add_option("--html", args->html,
                      "Write the self-contained HTML report to FILE ('-': stdout)")
      ->type_name("FILE");
  command->add_flag("--text", args->text, "Print the text report on stdout (the default without --html)");
  command->add_option("--data", args->data,
                      "The audited data file: checks its SHA-256 against the audit, then adds the "
                      "diagnostics of the final model (one pass over the rows)")
      ->check(CLI::ExistingFile)
      ->type_name("DATA");
  command->add_option("--title", args->title, "Heading of the report (default: 'Selection report: DATA')")
      ->type_name("TEXT");
  AddCommonOptions(*command, context.common);
  command->footer(
      "The report renders from the audit alone (and, with --data, one pass over the data that "
      "the audit's fingerprint identifies; a different file is refused with exit 2). The HTML "
      "file has no scripts and fetches nothing: it reads the same offline, printed, or on a "
      "phone. `select --out DIR` writes DIR/report.html with the diagnostics already in it. "
      "With --json: {audit, seal, html, diagnostics, rows_diagnosed} instead of the text.\n\n"
      "Examples:\n"
      "  stepledger report out/audit.json\n"
      "  stepledger report out/audit.json --data examples/data/laptops.csv --html review.html\n"
      "  stepledger report out/audit.json --html review.html --text --force > review.txt");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunReport(*args, context); };
  });
}

}  // namespace stepledger::cli

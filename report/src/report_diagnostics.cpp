// The diagnostics of an audit's final model on its data file, for `report --data`.

#include <algorithm>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/report/report.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/table_scan.h"

namespace stepledger {

ReportDiagnostics DiagnoseAuditRows(const nlohmann::json& audit, const DataSet& data,
                                    std::string_view audit_name,
                                    const std::function<void(std::string_view)>& stand_out_csv,
                                    const DataReadOptions& read_options) {
  const std::string expected =
      audit.contains("data") && audit["data"].is_object() && audit["data"].contains("sha256") &&
              audit["data"]["sha256"].is_string()
          ? audit["data"]["sha256"].get<std::string>()
          : std::string();
  if (expected.empty()) {
    throw InputError(std::string(audit_name) + ": data.sha256: missing; cannot check the data file");
  }
  const FittedModel model = FittedModelFromAudit(audit, audit_name, read_options.limits);
  const RunOptions recorded =
      RunOptionsFromSettings(audit.contains("settings") ? audit["settings"] : nlohmann::json());
  // One scan: the fingerprint and the typed spill of the rows in the same pass over the text.
  ScanOptions scan_options;
  scan_options.csv = recorded.csv;
  scan_options.csv.missing_tokens = model.missing_tokens;
  scan_options.threads = read_options.threads;
  scan_options.work_dir = read_options.work_dir;
  scan_options.csv.max_columns = read_options.limits.columns;
  // The levels limit, but at least the levels of the model's own categorical terms (with the
  // baseline), which the audit's run kept: fewer would make their rows look like unseen levels.
  scan_options.profile.max_levels = static_cast<std::size_t>(read_options.limits.levels);
  for (const DesignTerm& term : model.design.terms) {
    if (term.kind == TermKind::kCategorical) {
      scan_options.profile.max_levels = std::max(scan_options.profile.max_levels, term.levels.size() + 1);
    }
  }
  const ScanResult scan = ScanData(data, scan_options);
  // The fingerprint before any row is used: diagnostics of other rows than the audited ones
  // would mislead.
  if (scan.sha256 != expected) {
    throw InputError(DescribeDataSet(data) + ": not the data of " + std::string(audit_name) + ": its SHA-256 is " +
                     scan.sha256 + ", the audit's data.sha256 is " + expected);
  }
  ReportDiagnostics diagnostics;
  // The audit of a data set lists its files (data.files); its rows are named with their file.
  if (audit["data"].contains("files")) {
    for (const ScannedFile& file : scan.files) diagnostics.set_files.push_back(file.path.filename().string());
  }
  DiagnosticsOptions options;
  options.rows_by_record = !diagnostics.set_files.empty();
  if (stand_out_csv) {
    // The thresholds depend on n and k alone, so the rows are written as the pass meets them.
    const StandOutThresholds thresholds = StandOutThresholds::CommonPractice(model.fit.n, model.fit.k);
    stand_out_csv(diagnostics.set_files.empty() ? kStandOutCsvHeader : kStandOutSetCsvHeader);
    options.row_observer = [&stand_out_csv, thresholds, &diagnostics](const RowDiagnostic& row) {
      if (thresholds.StandsOut(row)) stand_out_csv(StandOutRowCsv(row, thresholds, diagnostics.set_files));
    };
  }
  diagnostics.result =
      ComputeDiagnostics(model.fit, model.design, SpillRowReplay(scan.spill, model.design), options);
  diagnostics.k = model.fit.k;
  diagnostics.sigma = model.fit.criteria.sigma;
  return diagnostics;
}

}  // namespace stepledger

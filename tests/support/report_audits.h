#pragma once
// Audits made by the real pipeline (RunPlan + WriteAuditDocument) on the invented
// laptop data of audit_test_data.h, for the report tests: stepwise BIC with a power and a
// product (so hierarchy makes candidates ineligible), all-subsets BIC, and a logged response
// with a categorical term.

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <memory>
#include <set>
#include <vector>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/diagnostics.h"
#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger::testing {

/// Stepwise BIC over the laptop columns plus age^2 and age:grade (hierarchy-bound terms).
inline std::string HierarchyLaptopPlan(const std::string& method = "stepwise",
                                       const std::string& transform = "none") {
  nlohmann::ordered_json plan = {
      {"response", "price"},
      {"response_transform", transform},
      {"terms",
       {{{"name", "age"}, {"column", "age_months"}},
        {{"name", "age^2"}, {"power", {{"column", "age_months"}, {"degree", 2}}}},
        {{"name", "ram"}, {"column", "ram_gb"}},
        {{"name", "disk"}, {"column", "disk_gb"}},
        {{"name", "grade"}, {"categorical", "grade"}, {"baseline", "B"}},
        {{"name", "battery"}, {"column", "battery_cycles"}},
        {{"name", "age:grade"}, {"product", {"age", "grade"}}}}},
      {"method", method},
      {"criterion", "bic"}};
  return plan.dump(2) + "\n";
}

/// Every row's diagnostic of an audit's final model on its data, in file order (tests only:
/// the product keeps a bounded summary). The same pass as DiagnoseAuditRows.
inline std::vector<RowDiagnostic> AllRowDiagnostics(const nlohmann::json& audit, const std::filesystem::path& data) {
  const FittedModel model = FittedModelFromAudit(audit, "audit.json");
  CsvOptions csv = RunOptionsFromSettings(audit.contains("settings") ? audit["settings"] : nlohmann::json()).csv;
  csv.missing_tokens = model.missing_tokens;
  std::vector<RowDiagnostic> rows;
  DiagnosticsOptions options;
  options.row_observer = [&rows](const RowDiagnostic& row) { rows.push_back(row); };
  ComputeDiagnostics(model.fit, model.design, FileRowReplay(data, model.design, csv), options);
  return rows;
}

/// One audit on disk and parsed, with the diagnostics of its final model (and, for checks,
/// every row's diagnostic).
struct ReportAudit {
  std::filesystem::path data;
  std::filesystem::path audit_path;
  nlohmann::json audit;
  ReportDiagnostics diagnostics;
  std::vector<RowDiagnostic> rows;
};

/// Writes data and the audit of plan_text under folder/name and reads them back.
inline ReportAudit MakeReportAudit(const TempDir& folder, const std::string& name,
                                   const std::string& csv_text, const std::string& plan_text) {
  ReportAudit made;
  made.data = folder.Write(name + ".csv", csv_text);
  made.audit_path = WriteAuditWithLibrary(made.data, plan_text, folder.path() / name);
  made.audit = ReadAuditFile(made.audit_path);
  made.diagnostics = DiagnoseAuditRows(made.audit, made.data, "audit.json");
  made.rows = AllRowDiagnostics(made.audit, made.data);
  return made;
}

/// Rows with a defined standardised residual.
inline int RowsWithStandardizedResidual(const std::vector<RowDiagnostic>& rows) {
  int count = 0;
  for (const RowDiagnostic& row : rows) count += row.standardized_residual ? 1 : 0;
  return count;
}

/// The first `count` rows under `before`, by sorting all of them (the brute-force check of the
/// diagnostics' bounded lists).
inline std::vector<RowDiagnostic> BruteForceTop(std::vector<RowDiagnostic> rows,
                                                bool (*before)(const RowDiagnostic&, const RowDiagnostic&),
                                                std::size_t count = kDiagnosticsTopRows) {
  std::sort(rows.begin(), rows.end(), before);
  if (rows.size() > count) rows.resize(count);
  return rows;
}

/// What the diagnostics charts should draw, counted from every row by the rules (common
/// practice: Cook's distance above 4/n; rows that stand out: 4/n, |standardised residual| > 3,
/// leverage > 2k/n, or leverage 1): the rows above 4/n among the kDiagnosticsTopRows largest
/// distances, and the rows that stand out among the largest of each measure, each capped at
/// the default 200 points; and the totals.
struct DiagnosticsCounts {
  int cooks_above = 0;
  int stand_out = 0;
  int cooks_above_total = 0;
  int stand_out_total = 0;
};
inline DiagnosticsCounts CountDiagnostics(const std::vector<RowDiagnostic>& rows, std::size_t k, int cap = 200) {
  const StandOutThresholds thresholds = StandOutThresholds::CommonPractice(rows.size(), k);
  DiagnosticsCounts counts;
  for (const RowDiagnostic& row : rows) {
    counts.cooks_above_total += thresholds.CooksAbove(row) ? 1 : 0;
    counts.stand_out_total += thresholds.StandsOut(row) ? 1 : 0;
  }
  for (const RowDiagnostic& row : BruteForceTop(rows, LargerCooksDistanceFirst)) {
    counts.cooks_above += thresholds.CooksAbove(row) ? 1 : 0;
  }
  std::set<std::uint64_t> listed;
  for (auto before : {LargerCooksDistanceFirst, LargerStandardizedResidualFirst, LargerLeverageFirst}) {
    for (const RowDiagnostic& row : BruteForceTop(rows, before)) {
      if (thresholds.StandsOut(row)) listed.insert(row.row_index);
    }
  }
  counts.stand_out = static_cast<int>(listed.size());
  counts.cooks_above = std::min(counts.cooks_above, cap);
  counts.stand_out = std::min(counts.stand_out, cap);
  return counts;
}

}  // namespace stepledger::testing

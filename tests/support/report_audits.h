#pragma once
// Audits made by the real pipeline (RunPlan + WriteAuditDocument) on the invented
// laptop data of audit_test_data.h, for the report tests: stepwise BIC with a power and a
// product (so hierarchy makes candidates ineligible), all-subsets BIC, and a logged response
// with a categorical term.

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <memory>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
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

/// One audit on disk and parsed, with the diagnostics of its final model.
struct ReportAudit {
  std::filesystem::path data;
  std::filesystem::path audit_path;
  nlohmann::json audit;
  ReportDiagnostics diagnostics;
};

/// Writes data and the audit of plan_text under folder/name and reads them back.
inline ReportAudit MakeReportAudit(const TempDir& folder, const std::string& name,
                                   const std::string& csv_text, const std::string& plan_text) {
  ReportAudit made;
  made.data = folder.Write(name + ".csv", csv_text);
  made.audit_path = WriteAuditWithLibrary(made.data, plan_text, folder.path() / name);
  made.audit = ReadAuditFile(made.audit_path);
  made.diagnostics = DiagnoseAuditRows(made.audit, made.data, "audit.json");
  return made;
}

/// Rows of the diagnostics with a defined standardised residual (the points of each
/// diagnostics chart).
inline int RowsWithStandardizedResidual(const ReportDiagnostics& diagnostics) {
  int count = 0;
  for (const RowDiagnostic& row : diagnostics.result.rows) count += row.standardized_residual ? 1 : 0;
  return count;
}

/// What the diagnostics charts should draw, counted from the rows by the rules (common
/// practice): rows above Cook's 4/n, and rows that stand out (4/n, |standardised residual| > 3,
/// leverage > 2k/n, or leverage 1), each capped at the default 200 points.
struct DiagnosticsCounts {
  int cooks_above = 0;
  int stand_out = 0;
};
inline DiagnosticsCounts CountDiagnostics(const ReportDiagnostics& diagnostics, int cap = 200) {
  const double n = static_cast<double>(diagnostics.result.rows.size());
  const double cooks = 4 / n, leverage = 2 * static_cast<double>(diagnostics.k) / n;
  DiagnosticsCounts counts;
  for (const RowDiagnostic& row : diagnostics.result.rows) {
    const bool above = row.cooks_distance && *row.cooks_distance > cooks;
    counts.cooks_above += above ? 1 : 0;
    counts.stand_out += (above || !row.standardized_residual || std::abs(*row.standardized_residual) > 3 ||
                         row.leverage > leverage)
                            ? 1
                            : 0;
  }
  counts.cooks_above = std::min(counts.cooks_above, cap);
  counts.stand_out = std::min(counts.stand_out, cap);
  return counts;
}

}  // namespace stepledger::testing

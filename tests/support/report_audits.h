#pragma once
// Audits made by the real pipeline (RunPlanForAudit + WriteAuditDocument) on the invented
// laptop data of audit_test_data.h, for the report tests: stepwise BIC with a power and a
// product (so hierarchy makes candidates ineligible), all-subsets BIC, and a logged response
// with a categorical term.

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

}  // namespace stepledger::testing

// The audit and its report written as one unit: shared by the command line (`select --out`,
// `rerun --out`) and the Python module, so that both write exactly the same files.

#include <optional>
#include <string>
#include <utility>

#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"

namespace stepledger {

std::optional<ReportDiagnostics> RunReportDiagnostics(const RunResult& run) {
  if (!run.diagnostics) return std::nullopt;
  return ReportDiagnostics{*run.diagnostics, run.fit.k, run.fit.criteria.sigma, SetFileNames(run)};
}

void WriteAuditWithReport(const std::filesystem::path& folder, const nlohmann::json& sealed_document,
                          const RunResult& run, bool overwrite) {
  const std::optional<ReportDiagnostics> diagnostics = RunReportDiagnostics(run);
  std::string report = RenderHtmlReport(sealed_document, diagnostics ? &*diagnostics : nullptr);
  WriteAuditFolder(folder, sealed_document, {{std::string(kReportFileName), std::move(report)}}, overwrite);
}

}  // namespace stepledger

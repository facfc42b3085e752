// The audit and its report written as one unit: shared by the command line (`select --out`,
// `rerun --out`) and the Python module, so that both write exactly the same files.

#include <optional>
#include <string>
#include <utility>

#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"

namespace stepledger {

void WriteAuditWithReport(const std::filesystem::path& folder, const nlohmann::json& sealed_document,
                          const RunResult& run, bool overwrite) {
  std::optional<ReportDiagnostics> diagnostics;
  if (run.diagnostics) diagnostics = ReportDiagnostics{*run.diagnostics, run.fit.k, run.fit.criteria.sigma};
  std::string report = RenderHtmlReport(sealed_document, diagnostics ? &*diagnostics : nullptr);
  WriteAuditFolder(folder, sealed_document, {{std::string(kReportFileName), std::move(report)}}, overwrite);
}

}  // namespace stepledger

#include "stepledger/audit/rerun.h"

#include "stepledger/audit/audit_document.h"

namespace stepledger {

RerunResult RerunRecordedPlan(const nlohmann::json& parent, const DataSet& data, const std::string& parent_name,
                              const ReplayOverrides& overrides, SearchObserver* observer,
                              const std::filesystem::path& sign_key) {
  RerunResult result;
  result.run = ReplayRecordedPlan(parent, data, parent_name, overrides, observer);
  const nlohmann::json unsealed = BuildAuditDocument(result.run);
  CompareOptions compare_options;
  compare_options.old_name = parent_name;
  compare_options.new_name = "the new audit";
  result.comparison = CompareAudits(parent, unsealed, compare_options);
  result.comparison.prediction = PredictionComparison(parent, unsealed, data, result.run.options.csv);

  AuditDocumentOptions document_options;
  document_options.parent = nlohmann::json{
      {"seal", parent.at("seal")},
      {"created_at", parent.value("created_at", nlohmann::json(nullptr))},
      {"data_sha256", parent.at("data").value("sha256", nlohmann::json(nullptr))},
      {"data_file", parent.at("data").value("file", nlohmann::json(nullptr))}};
  document_options.comparison = result.comparison.ToJson();
  result.audit = BuildSealedAudit(result.run, document_options, sign_key);
  return result;
}

}  // namespace stepledger

// Fuzz target: reading an audit (audit/audit_document.h ReadAuditFile), checking it without data
// (audit/audit_verify.h, what `stepledger verify AUDIT` does) and interpreting it the way
// `predict`, `report --data` and a replay do (AuditInCurrentShape, FittedModelFromAudit,
// MakePricingModel, the Predictor, RunOptionsFromSettings).
//
// Checked: every stage ends in a value or an InputError naming the file or the key; VerifyAudit
// without data never throws for content problems (it reports them) and says that the data
// were not checked.

#include <cstdint>
#include <string>

#include "fuzz_support.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/engine/prediction.h"

namespace stepledger::fuzz {
namespace {

void CheckAudit(std::string_view bytes) {
  const std::filesystem::path path = PrivateTempDir() / "audit.json";
  WriteFileOrDie(path, bytes);
  nlohmann::json document;
  try {
    document = ReadAuditFile(path);
  } catch (const InputError&) {
    return;  // not an audit this tool reads: exit 2
  }

  // verify without data: content problems are reported, never thrown.
  try {
    const VerifyReport report = VerifyAudit(document, VerifyOptions{});
    if (report.DataChecked()) Finding("verify without data says the data were checked");
    if (report.FullReport().empty()) Finding("verify's report is empty");
    (void)report.ToJson().dump();
  } catch (const std::exception& error) {
    Finding("VerifyAudit without data threw for content: " + TypeName(error) + ": " + error.what());
  }

  ExpectOnlyInputErrors("AuditInCurrentShape", [&] { (void)AuditInCurrentShape(document).dump(); });
  ExpectOnlyInputErrors("RunOptionsFromSettings", [&] {
    const RunOptions options = RunOptionsFromSettings(document.contains("settings") ? document["settings"]
                                                                                    : nlohmann::json());
    options.Validate();
  });
  ExpectOnlyInputErrors("the model rebuilt for pricing", [&] {
    const FittedModel fitted = FittedModelFromAudit(document, "audit.json");
    const Predictor predictor(MakePricingModel(fitted));
    (void)predictor.t_quantile();
  });
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("audit reader", [&] { CheckAudit(AsText(data, size)); });
  return 0;
}

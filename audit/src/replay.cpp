#include "stepledger/audit/replay.h"

#include <string>

#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/errors.h"
#include "stepledger/io/plan_file.h"

namespace stepledger {

RunResult ReplayRecordedPlan(const nlohmann::json& audit, const std::filesystem::path& data,
                             std::string_view audit_name, const ReplayOverrides& overrides,
                             SearchObserver* observer) {
  const std::string name(audit_name);
  if (!audit.is_object() || !audit.contains("plan") || !audit["plan"].is_object() ||
      !audit["plan"].contains("verbatim") || !audit["plan"]["verbatim"].is_string()) {
    throw InputError(name + ": key 'plan.verbatim': expected the recorded plan's text");
  }
  const LoadedPlan loaded =
      ParsePlanText(audit["plan"]["verbatim"].get<std::string>(), name + " plan.verbatim", overrides.limits);
  RunOptions options = RunOptionsFromSettings(audit.value("settings", nlohmann::json::object()));
  if (overrides.threads) options.threads = *overrides.threads;
  if (overrides.delimiter) options.csv.delimiter = *overrides.delimiter;
  options.work_dir = overrides.work_dir;
  options.limits = overrides.limits;
  return RunPlan(data, loaded, options, observer);
}

}  // namespace stepledger

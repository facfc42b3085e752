#include "stepledger/audit/replay.h"

#include <sched.h>

#include <algorithm>
#include <string>
#include <thread>

#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/errors.h"
#include "stepledger/io/plan_file.h"

namespace stepledger {

int CoresAvailable() {
  cpu_set_t set;
  CPU_ZERO(&set);
  int cores = 0;
  if (sched_getaffinity(0, sizeof set, &set) == 0) cores = CPU_COUNT(&set);
  if (cores < 1) cores = static_cast<int>(std::thread::hardware_concurrency());
  return std::clamp(cores, 1, kMaxRecordedThreads);
}

RunResult ReplayRecordedPlan(const nlohmann::json& audit, const DataSet& data,
                             std::string_view audit_name, const ReplayOverrides& overrides,
                             SearchObserver* observer) {
  const std::string name(audit_name);
  if (!audit.is_object() || !audit.contains("plan") || !audit["plan"].is_object() ||
      !audit["plan"].contains("verbatim") || !audit["plan"]["verbatim"].is_string()) {
    throw InputError(name + ": key 'plan.verbatim': expected the recorded plan's text");
  }
  const LoadedPlan loaded =
      ParsePlanText(audit["plan"]["verbatim"].get<std::string>(), name + " plan.verbatim", overrides.limits);
  RunOptions options = RunOptionsFromSettings(audit.value("settings", nlohmann::json::object()), name);
  // The recorded count is the recording machine's; more threads than cores here would only
  // cost memory (the count changes the numbers to rounding only).
  options.threads = overrides.threads ? *overrides.threads : std::min(options.threads, CoresAvailable());
  if (overrides.delimiter) options.csv.delimiter = *overrides.delimiter;
  options.work_dir = overrides.work_dir;
  options.limits = overrides.limits;
  options.shares = overrides.shares;
  return RunPlan(data, loaded, options, observer);
}

}  // namespace stepledger

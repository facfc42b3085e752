#pragma once
// `rerun` composed once: the recorded plan on new data (ReplayRecordedPlan), the comparison with
// the parent (CompareAudits, and the old model's prices on the new rows), and the new audit
// linked to its parent's seal. The command line (`stepledger rerun`) and the Python module's
// `rerun` both call it, so that they write the same audit.

#include <filesystem>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/replay.h"
#include "stepledger/run/run_plan.h"

namespace stepledger {

struct RerunResult {
  RunResult run;
  AuditComparison comparison;
  /// The new audit, sealed (and signed with a sign key), with `parent` and `comparison`.
  nlohmann::json audit;
};

/// Runs the parent's recorded plan on data and builds the linked audit. The caller checks the
/// parent's integrity first (each says in its own words why it refuses one that does not hold).
/// parent_name (the parent's file name) names it in messages and the comparison. The old model
/// prices the new rows (PredictionComparison) whether they are files or columns in memory
/// (DataSet::columns). Throws InputError as ReplayRecordedPlan does.
RerunResult RerunRecordedPlan(const nlohmann::json& parent, const DataSet& data, const std::string& parent_name,
                              const ReplayOverrides& overrides, SearchObserver* observer = nullptr,
                              const std::filesystem::path& sign_key = {});

}  // namespace stepledger

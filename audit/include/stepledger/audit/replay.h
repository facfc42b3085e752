#pragma once
// The one replay of a recorded plan: `verify --data` (same data: the route must come out the
// same) and `rerun` (new data: what changed) both run an audit's plan through here, so that
// they cannot disagree on what "the recorded plan" is.

#include <filesystem>
#include <optional>
#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/run/run_plan.h"

namespace stepledger {

/// What a replay may run differently from the recording (neither changes the numbers beyond
/// rounding: the thread count changes the order of merges, the delimiter only the reading).
struct ReplayOverrides {
  /// Threads of the data pass (--threads); nullopt: as recorded in `settings`, at most the cores.
  std::optional<int> threads;
  /// Field delimiter of the data; nullopt: as recorded.
  std::optional<char> delimiter;
  /// Where the typed spill goes (never recorded); empty: the system temporary folder.
  std::filesystem::path work_dir;
  /// The limits of the replaying command (never recorded: an audit cannot lift them); they also
  /// apply to the recorded plan's text and terms.
  InputLimits limits;
  /// The processes of a cluster run (mpirun) that share the data (RunOptions::shares); null: this
  /// process alone. Every process calls the replay; on all but process 0 it throws ShareServed
  /// once process 0 is done.
  ShareExchange* shares = nullptr;
};

/// The cores this process may run on (sched_getaffinity), from 1 to kMaxRecordedThreads.
int CoresAvailable();

/// Runs the audit's recorded plan (plan.verbatim, read as a plan file is read) with its recorded
/// settings (RunOptionsFromSettings: type- and range-checked) on data, with no more threads than
/// CoresAvailable() unless overrides.threads says how many. audit_name (the audit's file name) starts messages. Throws InputError when
/// the recorded plan is missing or unusable (naming the key) or the data cannot be read.
/// observer (optional) sees the search's events (progress).
RunResult ReplayRecordedPlan(const nlohmann::json& audit, const DataSet& data,
                             std::string_view audit_name, const ReplayOverrides& overrides = {},
                             SearchObserver* observer = nullptr);

}  // namespace stepledger

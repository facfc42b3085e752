#pragma once
// Notes for the user that do not stop the work: one line each, for example a pass that runs on
// fewer threads than asked because the system refused to start one. They go to the notice sink:
// standard error ("stepledger: note: ...") unless a caller points it elsewhere (RunCli sends
// them to its error stream for the length of a command).

#include <functional>
#include <string_view>

namespace stepledger {

using NoticeSink = std::function<void(std::string_view line)>;

/// Sets the sink (an empty function: standard error) and returns the one it replaces.
NoticeSink SetNoticeSink(NoticeSink sink);

/// Sends one line (no newline) to the sink. Safe to call from any thread.
void Notice(std::string_view line);

}  // namespace stepledger

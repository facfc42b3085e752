#pragma once
// Private: the one way the engine starts its threads. std::thread's constructor throws
// std::system_error when the system refuses a thread (EAGAIN under a memory limit such as
// `ulimit -v`, or a limit on processes) and std::bad_alloc when its bookkeeping cannot be
// allocated; an uncaught throw, or a joinable thread destroyed on the way out, would end the
// process through std::terminate. RunTasks runs the tasks that got no thread on the calling
// thread instead, one after another, and says so in one notice (engine/notice.h).
//
// Nothing outside engine/src includes this file.

#include <sys/resource.h>
#if defined(__GLIBC__)
#include <malloc.h>
#endif

#include <algorithm>
#include <cstddef>
#include <mutex>
#include <new>
#include <string>
#include <string_view>
#include <system_error>
#include <thread>
#include <vector>

#include "stepledger/engine/notice.h"

namespace stepledger::detail {

/// Under an address-space limit (RLIMIT_AS, e.g. `ulimit -v`), glibc's malloc would reserve 64
/// MiB of it for every thread's own arena and keep it after the thread ends, leaving no room for
/// the work buffers of the linear algebra later (engine/src/lapack.h): there, every thread
/// shares one arena. Called before the engine starts its first thread; once per process.
inline void ShareOneMallocArenaUnderAnAddressLimit() {
  static std::once_flag once;
  std::call_once(once, [] {
    rlimit limit{};
    if (getrlimit(RLIMIT_AS, &limit) != 0 || limit.rlim_cur == RLIM_INFINITY) return;
#if defined(__GLIBC__)
    mallopt(M_ARENA_MAX, 1);
#endif
  });
}

/// Runs task(0) ... task(count - 1): the first count - 1 each on its own thread when the system
/// gives one, the last one (and those that get no thread) on the calling thread, in order, while
/// the started ones run. Returns when
/// every task has finished. Tasks must be independent (their order of running is not fixed) and
/// should catch their own errors; an exception that escapes a task run on the calling thread
/// propagates once every started thread has been joined (one escaping a started thread ends
/// the process, as with any std::thread). `what` names the work in the notices ("reading the
/// data").
///
/// max_at_once (>= 1) bounds how many tasks run at the same time (a pass whose threads each
/// need a large buffer under an address-space limit): below count, only max_at_once - 1 threads
/// are started and the calling thread runs the other tasks, with a notice giving `why` (at or
/// above count, count - 1 threads and the calling thread, without a notice). The
/// tasks and their order of results are the same either way, so the results are too.
template <typename Task>
void RunTasks(std::size_t count, const Task& task, std::string_view what, std::size_t max_at_once,
              std::string_view why = {}) {
  std::vector<std::thread> threads;
  // Joins every started thread on any way out, so that a throw never meets a joinable thread.
  struct Joiner {
    std::vector<std::thread>& threads;
    ~Joiner() {
      for (std::thread& thread : threads) {
        if (thread.joinable()) thread.join();
      }
    }
  } joiner{threads};
  auto notice = [](const std::string& line) {
    try {
      Notice(line);
    } catch (const std::exception&) {
      // A note that cannot be written (no memory for it) must not stop the work.
    }
  };
  // The calling thread runs a task itself (the last ones) rather than wait idle: one thread fewer,
  // and whatever the calling thread checks between blocks of its work (a PassCheck,
  // engine/data_pass.h) goes on while the pass runs.
  const std::size_t at_once = std::min(count, std::max<std::size_t>(max_at_once, 1));
  const std::size_t to_start = at_once == 0 ? 0 : at_once - 1;
  if (to_start < count && max_at_once < count) {
    notice(std::string(what) + " runs " + std::to_string(max_at_once) + " of its " + std::to_string(count) +
           " parts at a time instead of all at once: " + std::string(why));
  }
  ShareOneMallocArenaUnderAnAddressLimit();
  std::size_t started = 0;
  std::string refusal;
  try {
    threads.reserve(to_start);
    for (; started < to_start; ++started) threads.emplace_back(task, started);
  } catch (const std::system_error& error) {
    refusal = error.what();
  } catch (const std::bad_alloc&) {
    refusal = "out of memory";
  }
  if (started < to_start) {
    notice("the system refused to start a thread (" + refusal + "); " + std::string(what) + " runs " +
           std::to_string(count - started) + " of its " + std::to_string(count) +
           " parts on the calling thread, one after another (same results, more time)");
  }
  for (std::size_t t = started; t < count; ++t) task(t);
}

/// RunTasks with no bound but the system's.
template <typename Task>
void RunTasks(std::size_t count, const Task& task, std::string_view what) {
  RunTasks(count, task, what, count);
}

}  // namespace stepledger::detail

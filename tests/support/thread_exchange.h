#pragma once
// Processes played by threads: an in-process ShareExchange (engine/share_exchange.h) over
// mailboxes, the exchange the cluster library gives over MPI. For the tests of shared scans and
// shared runs, which need no MPI (and so run under the sanitizers too).

#include <condition_variable>
#include <deque>
#include <map>
#include <mutex>
#include <string>
#include <utility>

#include "stepledger/engine/share_exchange.h"

namespace stepledger::testing {

// Mailboxes between numbered threads: the exchange the cluster library gives over MPI.
class Mailboxes {
 public:
  void Put(int from, int to, std::string bytes) {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      boxes_[{from, to}].push_back(std::move(bytes));
    }
    changed_.notify_all();
  }
  std::string Take(int from, int to) {
    std::unique_lock<std::mutex> lock(mutex_);
    auto& box = boxes_[{from, to}];
    changed_.wait(lock, [&box] { return !box.empty(); });
    std::string bytes = std::move(box.front());
    box.pop_front();
    return bytes;
  }

 private:
  std::mutex mutex_;
  std::condition_variable changed_;
  std::map<std::pair<int, int>, std::deque<std::string>> boxes_;
};

class ThreadExchange : public ShareExchange {
 public:
  ThreadExchange(Mailboxes& boxes, int index, int count) : boxes_(boxes), index_(index), count_(count) {}
  int index() const override { return index_; }
  int count() const override { return count_; }
  void Send(int to, const std::string& bytes) override { boxes_.Put(index_, to, bytes); }
  std::string Receive(int from) override { return boxes_.Take(from, index_); }

 private:
  Mailboxes& boxes_;
  int index_;
  int count_;
};

}  // namespace stepledger::testing

#include "stepledger/engine/notice.h"

#include <iostream>
#include <mutex>
#include <string>
#include <utility>

namespace stepledger {
namespace {

std::mutex& SinkMutex() {
  static std::mutex mutex;
  return mutex;
}

NoticeSink& Sink() {
  static NoticeSink sink;
  return sink;
}

}  // namespace

NoticeSink SetNoticeSink(NoticeSink sink) {
  const std::lock_guard<std::mutex> lock(SinkMutex());
  return std::exchange(Sink(), std::move(sink));
}

void Notice(std::string_view line) {
  const std::lock_guard<std::mutex> lock(SinkMutex());
  if (Sink()) {
    Sink()(line);
  } else {
    std::cerr << "stepledger: note: " << line << '\n' << std::flush;
  }
}

}  // namespace stepledger

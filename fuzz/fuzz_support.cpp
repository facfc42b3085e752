#include "fuzz_support.h"

#include <unistd.h>

#include <cstdlib>
#include <fstream>
#include <string>
#include <system_error>

namespace stepledger::fuzz {
namespace {

std::filesystem::path& TempDirPath() {
  static std::filesystem::path path;
  return path;
}

void RemoveTempDir() {
  std::error_code ignored;
  if (!TempDirPath().empty()) std::filesystem::remove_all(TempDirPath(), ignored);
}

}  // namespace

const std::filesystem::path& PrivateTempDir() {
  std::filesystem::path& path = TempDirPath();
  if (path.empty()) {
    std::string pattern = (std::filesystem::temp_directory_path() / "stepledger-fuzz-XXXXXX").string();
    if (::mkdtemp(pattern.data()) == nullptr) {
      std::perror("stepledger fuzz: mkdtemp");
      std::abort();
    }
    path = pattern;
    std::atexit(RemoveTempDir);
  }
  return path;
}

void WriteFileOrDie(const std::filesystem::path& path, std::string_view bytes) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  out.close();
  if (!out) {
    std::fprintf(stderr, "stepledger fuzz: cannot write %s\n", path.c_str());
    std::abort();
  }
}

}  // namespace stepledger::fuzz

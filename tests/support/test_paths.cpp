#include "support/test_paths.h"

#include <array>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <random>
#include <stdexcept>
#include <sys/wait.h>

namespace stepledger::testing {
namespace {

std::string FromEnvironmentOr(const char* name, const char* fallback) {
  const char* value = std::getenv(name);
  return value != nullptr && *value != '\0' ? std::string(value) : std::string(fallback);
}

}  // namespace

std::filesystem::path ReferenceDir() {
  const std::filesystem::path folder = FromEnvironmentOr("STEPLEDGER_REFERENCE_DIR", STEPLEDGER_REFERENCE_DIR);
  std::error_code error;
  if (!std::filesystem::is_directory(folder, error)) {
    throw std::runtime_error("reference data folder '" + folder.string() +
                             "' is missing (tests/reference is part of the repository; "
                             "STEPLEDGER_REFERENCE_DIR overrides it)");
  }
  return folder;
}

std::string ReferencePython() {
  return FromEnvironmentOr("STEPLEDGER_REFERENCE_PYTHON", STEPLEDGER_REFERENCE_PYTHON);
}

bool PythonHasModules(const std::string& modules) {
  std::string script = "import " + modules;
  std::string command = "'" + ReferencePython() + "' -c '" + script + "' >/dev/null 2>&1";
  return RunCommand(command) == 0;
}

std::filesystem::path StepledgerBinary() {
  return FromEnvironmentOr("STEPLEDGER_BINARY", STEPLEDGER_BINARY);
}

std::filesystem::path SourceDir() { return STEPLEDGER_SOURCE_DIR; }

TempDir::TempDir() {
  std::random_device device;
  std::mt19937_64 generator(device());
  for (int attempt = 0; attempt < 100; ++attempt) {
    auto candidate = std::filesystem::temp_directory_path() /
                     ("stepledger-test-" + std::to_string(generator() % 1000000000ULL));
    if (std::filesystem::create_directory(candidate)) {
      path_ = candidate;
      return;
    }
  }
  throw std::runtime_error("cannot create a temporary folder");
}

TempDir::~TempDir() {
  std::error_code ignored;
  std::filesystem::remove_all(path_, ignored);
}

std::filesystem::path TempDir::Write(const std::string& name, const std::string& text) const {
  auto file = path_ / name;
  std::ofstream stream(file, std::ios::binary);
  stream << text;
  if (!stream) throw std::runtime_error("cannot write " + file.string());
  return file;
}

int RunCommand(const std::string& command, std::string* stdout_text) {
  FILE* pipe = popen(command.c_str(), "r");
  if (pipe == nullptr) return -1;
  std::array<char, 4096> buffer{};
  std::size_t got = 0;
  while ((got = fread(buffer.data(), 1, buffer.size(), pipe)) > 0) {
    if (stdout_text != nullptr) stdout_text->append(buffer.data(), got);
  }
  int status = pclose(pipe);
  if (status == -1) return -1;
  return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

}  // namespace stepledger::testing

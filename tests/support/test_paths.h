#pragma once
// Where tests find the reference data, the reference Python and the built executable.
// Paths come from compile definitions set in tests/CMakeLists.txt, and can be overridden by
// the environment variables of the same name (for running a test binary by hand).

#include <filesystem>
#include <optional>
#include <string>

namespace stepledger::testing {

/// The reference data folder (NIST StRD, Hald): the project's own copy, tests/reference, unless
/// STEPLEDGER_REFERENCE_DIR points elsewhere. Throws std::runtime_error naming the folder when it
/// is absent, so a reference test fails rather than skips.
std::filesystem::path ReferenceDir();

/// Debian's python3 (with python3-numpy/scipy/statsmodels), as configured.
std::string ReferencePython();
/// True when ReferencePython() can import every module named (comma-separated), e.g. "statsmodels".
bool PythonHasModules(const std::string& modules);

/// The stepledger executable built by this tree.
std::filesystem::path StepledgerBinary();
/// The source tree's root.
std::filesystem::path SourceDir();

/// A fresh, empty temporary folder removed when the object dies.
class TempDir {
 public:
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::filesystem::path& path() const { return path_; }
  /// Writes text to a file in the folder and returns its path.
  std::filesystem::path Write(const std::string& name, const std::string& text) const;

 private:
  std::filesystem::path path_;
};

/// Runs a shell command, returns its exit status and captures stdout (stderr goes through).
int RunCommand(const std::string& command, std::string* stdout_text = nullptr);

}  // namespace stepledger::testing

#include "stepledger/audit/atomic_file.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

std::string ErrnoText(int error_number) { return std::strerror(error_number); }

[[noreturn]] void Fail(const std::filesystem::path& path, const std::string& what, int error_number) {
  throw InputError(path.string() + ": " + what + ": " + ErrnoText(error_number));
}

// Removes the temporary file on every exit path unless released.
class TempFileGuard {
 public:
  explicit TempFileGuard(std::string path) : path_(std::move(path)) {}
  ~TempFileGuard() {
    if (fd_ >= 0) ::close(fd_);
    if (!path_.empty()) ::unlink(path_.c_str());
  }
  TempFileGuard(const TempFileGuard&) = delete;
  TempFileGuard& operator=(const TempFileGuard&) = delete;
  void set_fd(int fd) { fd_ = fd; }
  int fd() const { return fd_; }
  /// Closes the descriptor, reporting the close error (write-back errors can surface here).
  int Close() {
    const int result = ::close(fd_);
    fd_ = -1;
    return result;
  }
  void Release() { path_.clear(); }

 private:
  std::string path_;
  int fd_ = -1;
};

mode_t CurrentUmask() {
  // umask(2) can only be read by setting it; set it straight back.
  const mode_t mask = ::umask(0);
  ::umask(mask);
  return mask;
}

void SyncFolder(const std::filesystem::path& folder) {
  // Best effort: some file systems do not support fsync on a folder; the file itself is
  // already durable, so a failure here is not worth failing the command for.
  const int fd = ::open(folder.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) return;
  (void)::fsync(fd);
  ::close(fd);
}

}  // namespace

void WriteFileAtomically(const std::filesystem::path& path, std::string_view content,
                         const AtomicWriteOptions& options) {
  if (path.empty()) throw InputError("output path is empty");
  const std::filesystem::path folder =
      path.has_parent_path() ? path.parent_path() : std::filesystem::path(".");
  std::error_code status_error;
  if (!std::filesystem::is_directory(folder, status_error)) {
    throw InputError(path.string() + ": folder '" + folder.string() + "' does not exist");
  }
  if (!options.overwrite && std::filesystem::exists(std::filesystem::symlink_status(path))) {
    throw InputError(path.string() + ": file exists; use --force to overwrite");
  }

  std::string pattern = (folder / ("." + path.filename().string() + ".tmp.XXXXXX")).string();
  std::vector<char> temp_name(pattern.begin(), pattern.end());
  temp_name.push_back('\0');
  const int fd = ::mkstemp(temp_name.data());
  if (fd < 0) Fail(path, "cannot create a temporary file in '" + folder.string() + "'", errno);
  TempFileGuard guard(temp_name.data());
  guard.set_fd(fd);
  // mkstemp creates the file 0600; give it the permissions an ordinary new file would get.
  if (::fchmod(fd, static_cast<mode_t>(options.permissions) & ~CurrentUmask()) != 0) {
    Fail(path, "cannot set permissions of the temporary file", errno);
  }

  std::size_t written = 0;
  while (written < content.size()) {
    const ssize_t result = ::write(fd, content.data() + written, content.size() - written);
    if (result < 0) {
      if (errno == EINTR) continue;
      Fail(path, "cannot write", errno);
    }
    written += static_cast<std::size_t>(result);
  }
  if (::fsync(fd) != 0) Fail(path, "cannot flush to disk", errno);
  if (guard.Close() != 0) Fail(path, "cannot close", errno);

  if (options.overwrite) {
    if (::rename(temp_name.data(), path.c_str()) != 0) Fail(path, "cannot rename into place", errno);
    guard.Release();
  } else {
    if (::link(temp_name.data(), path.c_str()) != 0) {
      if (errno == EEXIST) throw InputError(path.string() + ": file exists; use --force to overwrite");
      Fail(path, "cannot move into place", errno);
    }
    // The guard unlinks the temporary name; the content stays under the final name.
  }
  SyncFolder(folder);
}

}  // namespace stepledger

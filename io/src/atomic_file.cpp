#include "stepledger/io/atomic_file.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <stdexcept>
#include <memory>
#include <utility>
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
  const std::string& path() const { return path_; }

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

// Creates a new, empty temporary file beside path (same folder, so that a rename is atomic),
// open for writing; the guard removes it unless released.
std::unique_ptr<TempFileGuard> CreateTemporaryBeside(const std::filesystem::path& path,
                                                     const std::filesystem::path& folder, unsigned permissions) {
  std::string pattern = (folder / ("." + path.filename().string() + ".tmp.XXXXXX")).string();
  std::vector<char> temp_name(pattern.begin(), pattern.end());
  temp_name.push_back('\0');
  const int fd = ::mkstemp(temp_name.data());
  if (fd < 0) Fail(path, "cannot create a temporary file in '" + folder.string() + "'", errno);
  auto guard = std::make_unique<TempFileGuard>(temp_name.data());
  guard->set_fd(fd);
  // mkstemp creates the file 0600; give it the permissions an ordinary new file would get.
  if (::fchmod(fd, static_cast<mode_t>(permissions) & ~CurrentUmask()) != 0) {
    Fail(path, "cannot set permissions of the temporary file", errno);
  }
  return guard;
}

void WriteAll(const std::filesystem::path& path, int fd, std::string_view content) {
  std::size_t written = 0;
  while (written < content.size()) {
    const ssize_t result = ::write(fd, content.data() + written, content.size() - written);
    if (result < 0) {
      if (errno == EINTR) continue;
      Fail(path, "cannot write", errno);
    }
    written += static_cast<std::size_t>(result);
  }
}

void FlushAndClose(const std::filesystem::path& path, TempFileGuard& guard) {
  if (::fsync(guard.fd()) != 0) Fail(path, "cannot flush to disk", errno);
  if (guard.Close() != 0) Fail(path, "cannot close", errno);
}

// Writes content to a new temporary file beside path, flushed to disk and closed.
std::unique_ptr<TempFileGuard> WriteTemporaryBeside(const std::filesystem::path& path,
                                                    const std::filesystem::path& folder,
                                                    std::string_view content, unsigned permissions) {
  auto guard = CreateTemporaryBeside(path, folder, permissions);
  WriteAll(path, guard->fd(), content);
  FlushAndClose(path, *guard);
  return guard;
}

bool Exists(const std::filesystem::path& path) {
  return std::filesystem::exists(std::filesystem::symlink_status(path));
}

}  // namespace

namespace {

std::filesystem::path CheckTarget(const std::filesystem::path& path, const AtomicWriteOptions& options) {
  if (path.empty()) throw InputError("output path is empty");
  const std::filesystem::path folder =
      path.has_parent_path() ? path.parent_path() : std::filesystem::path(".");
  std::error_code status_error;
  if (!std::filesystem::is_directory(folder, status_error)) {
    throw InputError(path.string() + ": folder '" + folder.string() + "' does not exist");
  }
  if (!options.overwrite && Exists(path)) {
    throw InputError(path.string() + ": file exists; use --force to overwrite");
  }
  return folder;
}

// Gives the flushed, closed temporary file the name path (see the top of atomic_file.h).
void PlaceTemporary(const std::filesystem::path& path, const std::filesystem::path& folder, TempFileGuard& guard,
                    const AtomicWriteOptions& options) {
  if (options.overwrite) {
    if (::rename(guard.path().c_str(), path.c_str()) != 0) Fail(path, "cannot rename into place", errno);
    guard.Release();
  } else {
    if (::link(guard.path().c_str(), path.c_str()) != 0) {
      if (errno == EEXIST) throw InputError(path.string() + ": file exists; use --force to overwrite");
      Fail(path, "cannot move into place", errno);
    }
    // The guard unlinks the temporary name; the content stays under the final name.
  }
  SyncFolder(folder);
}

}  // namespace

void WriteFileAtomically(const std::filesystem::path& path, std::string_view content,
                         const AtomicWriteOptions& options) {
  const std::filesystem::path folder = CheckTarget(path, options);
  const auto guard = WriteTemporaryBeside(path, folder, content, options.permissions);
  PlaceTemporary(path, folder, *guard, options);
}

struct AtomicFileWriter::Temporary {
  std::unique_ptr<TempFileGuard> guard;
};

AtomicFileWriter::AtomicFileWriter(std::filesystem::path path, const AtomicWriteOptions& options)
    : path_(std::move(path)), options_(options), temporary_(std::make_unique<Temporary>()) {
  folder_ = CheckTarget(path_, options_);
  temporary_->guard = CreateTemporaryBeside(path_, folder_, options_.permissions);
  buffer_.reserve(kBufferBytes);
}

AtomicFileWriter::~AtomicFileWriter() = default;

void AtomicFileWriter::Write(std::string_view text) {
  if (committed_) throw std::logic_error("AtomicFileWriter::Write after Commit");
  if (buffer_.size() + text.size() > kBufferBytes) {
    WriteAll(path_, temporary_->guard->fd(), buffer_);
    buffer_.clear();
    if (text.size() > kBufferBytes) {
      WriteAll(path_, temporary_->guard->fd(), text);
      return;
    }
  }
  buffer_.append(text);
}

void AtomicFileWriter::Commit() {
  if (committed_) throw std::logic_error("AtomicFileWriter::Commit called twice");
  WriteAll(path_, temporary_->guard->fd(), buffer_);
  buffer_.clear();
  FlushAndClose(path_, *temporary_->guard);
  PlaceTemporary(path_, folder_, *temporary_->guard, options_);
  committed_ = true;
}

void WriteOutputFolder(const std::filesystem::path& folder, const std::vector<OutputFile>& files,
                       const AtomicWriteOptions& options) {
  if (folder.empty()) throw InputError("output folder is empty");
  std::error_code error;
  bool created_folder = false;
  if (!std::filesystem::is_directory(folder, error)) {
    if (Exists(folder)) throw InputError(folder.string() + ": exists and is not a folder");
    if (!std::filesystem::create_directory(folder, error) || error) {
      throw InputError(folder.string() + ": cannot create the output folder: " + error.message());
    }
    created_folder = true;
  }
  // Removes the folder again when this call created it and fails before the end.
  struct FolderGuard {
    const std::filesystem::path& folder;
    bool armed;
    ~FolderGuard() {
      std::error_code ignored;
      if (armed) std::filesystem::remove(folder, ignored);  // only when empty
    }
  } folder_guard{folder, created_folder};

  // Every check before anything is written: a clash leaves the folder as it was.
  for (const OutputFile& file : files) {
    const std::filesystem::path target = folder / file.name;
    if (!Exists(target)) continue;
    if (!options.overwrite) throw InputError(target.string() + ": file exists; use --force to overwrite");
    if (!std::filesystem::is_regular_file(std::filesystem::symlink_status(target))) {
      throw InputError(target.string() + ": exists and is not a regular file; remove it first");
    }
  }
  std::vector<std::unique_ptr<TempFileGuard>> temporaries;
  for (const OutputFile& file : files) {
    temporaries.push_back(WriteTemporaryBeside(folder / file.name, folder, file.content, options.permissions));
  }

  // Old files step aside under a backup name, then the new ones take their names. On a failure
  // the new names are removed and the old files put back, so the folder holds either every new
  // file or the old ones untouched.
  std::vector<std::pair<std::filesystem::path, std::filesystem::path>> moved_aside;  // target, backup
  std::vector<std::filesystem::path> placed;
  auto roll_back = [&]() {
    for (const auto& target : placed) ::unlink(target.c_str());
    for (const auto& [target, backup] : moved_aside) ::rename(backup.c_str(), target.c_str());
  };
  for (std::size_t index = 0; index < files.size(); ++index) {
    const std::filesystem::path target = folder / files[index].name;
    if (!Exists(target)) continue;
    const std::filesystem::path backup = temporaries[index]->path() + ".previous";
    if (::rename(target.c_str(), backup.c_str()) != 0) {
      const int saved = errno;
      roll_back();
      Fail(target, "cannot move the previous file aside", saved);
    }
    moved_aside.emplace_back(target, backup);
  }
  for (std::size_t index = 0; index < files.size(); ++index) {
    const std::filesystem::path target = folder / files[index].name;
    if (::link(temporaries[index]->path().c_str(), target.c_str()) != 0) {
      const int saved = errno;
      roll_back();
      if (saved == EEXIST) throw InputError(target.string() + ": file exists; use --force to overwrite");
      Fail(target, "cannot move into place", saved);
    }
    placed.push_back(target);
  }
  for (const auto& [target, backup] : moved_aside) ::unlink(backup.c_str());
  SyncFolder(folder);
  folder_guard.armed = false;
}

}  // namespace stepledger

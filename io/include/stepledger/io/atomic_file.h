#pragma once
// Writing an output file so that no partial file is ever left behind (CONTRACT.md):
// the content goes to a temporary file in the same folder (same file system, so the final
// rename is atomic), is flushed and fsync'd, and only then takes the final name. The folder
// is fsync'd after the rename so that the new name survives a crash.
//
// Without overwrite, the final step is link(2) rather than rename(2): link fails when the
// name already exists, so two writers racing for the same name cannot clobber each other.

#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace stepledger {

struct AtomicWriteOptions {
  /// Replace an existing file of that name (the command line's --force). Default: refuse.
  bool overwrite = false;
  /// Permission bits of the new file (before the umask). Default 0644.
  unsigned permissions = 0644;
};

/// Writes content to path atomically. Throws InputError naming the path when the file exists
/// and options.overwrite is false ("... exists; use --force to overwrite"), when the folder
/// does not exist, or on any failure of the system calls (with the errno text). On failure the
/// temporary file is removed and path is untouched.
void WriteFileAtomically(const std::filesystem::path& path, std::string_view content,
                         const AtomicWriteOptions& options = {});

/// The same guarantee for content written piece by piece (a file that grows with the rows,
/// written during a pass over them): the constructor checks the target as WriteFileAtomically
/// does and creates the temporary file beside it; Write appends (buffered, 64 KiB); Commit
/// flushes, fsyncs and gives it the final name. Destroyed without Commit (an exception during
/// the pass), the temporary file is removed and path is untouched. Throws InputError naming the
/// path.
class AtomicFileWriter {
 public:
  AtomicFileWriter(std::filesystem::path path, const AtomicWriteOptions& options = {});
  ~AtomicFileWriter();
  AtomicFileWriter(const AtomicFileWriter&) = delete;
  AtomicFileWriter& operator=(const AtomicFileWriter&) = delete;
  void Write(std::string_view text);
  void Commit();
  const std::filesystem::path& path() const { return path_; }

 private:
  static constexpr std::size_t kBufferBytes = 1 << 16;
  struct Temporary;
  std::filesystem::path path_, folder_;
  AtomicWriteOptions options_;
  std::unique_ptr<Temporary> temporary_;
  std::string buffer_;
  bool committed_ = false;
};

/// One file of an output folder.
struct OutputFile {
  std::string name;     ///< file name inside the folder (no folder part)
  std::string content;
};

/// Writes several files into folder as one unit: afterwards the folder holds every new file, or,
/// on any failure (a clash without overwrite, a target that is a folder, a full disk, a failed
/// rename), the previous files untouched and no new or temporary file. The folder is created when
/// missing (its parent must exist) and removed again if this call created it and fails. Every
/// clash is checked before anything is written. Throws InputError naming the path.
/// (Two renames cannot be one atomic step: a crash between them can leave a ".previous" backup
/// beside a new file, never a lost old file.)
void WriteOutputFolder(const std::filesystem::path& folder, const std::vector<OutputFile>& files,
                       const AtomicWriteOptions& options = {});

}  // namespace stepledger

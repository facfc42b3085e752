#pragma once
// Writing an output file so that no partial file is ever left behind (CONTRACT.md):
// the content goes to a temporary file in the same folder (same file system, so the final
// rename is atomic), is flushed and fsync'd, and only then takes the final name. The folder
// is fsync'd after the rename so that the new name survives a crash.
//
// Without overwrite, the final step is link(2) rather than rename(2): link fails when the
// name already exists, so two writers racing for the same name cannot clobber each other.

#include <cstdint>
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

/// Writes one file atomically as the content is produced, for output that grows with the
/// rows and must not be held in memory: the bytes go to a temporary file beside path (the
/// same hidden ".NAME.tmp.XXXXXX" name WriteFileAtomically uses) and Commit() gives it the
/// final name. Destroying the writer before Commit() (an exception on the way) removes the
/// temporary file and leaves path untouched: nothing half-written is ever seen under path.
/// Memory: one buffer of buffer_bytes, whatever the size of the file.
class AtomicFileWriter {
 public:
  /// Bytes collected before each write(2). Default 64 KiB.
  static constexpr std::size_t kDefaultBufferBytes = std::size_t{1} << 16;

  /// Checks the folder and the clash (as WriteFileAtomically, same messages) and creates the
  /// temporary file, so that a refused target fails before any content is computed.
  explicit AtomicFileWriter(std::filesystem::path path, const AtomicWriteOptions& options = {},
                            std::size_t buffer_bytes = kDefaultBufferBytes);
  ~AtomicFileWriter();
  AtomicFileWriter(const AtomicFileWriter&) = delete;
  AtomicFileWriter& operator=(const AtomicFileWriter&) = delete;

  /// Appends bytes (buffered). Throws InputError naming path when the disk refuses them.
  /// std::logic_error after Commit().
  void Write(std::string_view bytes);
  /// Flushes, fsyncs and closes the temporary file, then moves it to path (rename with
  /// overwrite; link without, so that a file created meanwhile is not clobbered). Throws
  /// InputError naming path, after removing the temporary file. Call once.
  void Commit();

  const std::filesystem::path& path() const { return path_; }
  /// Bytes written so far (buffered ones included).
  std::uint64_t bytes_written() const { return bytes_written_; }

 private:
  class Temporary;
  void Flush();
  std::filesystem::path path_;
  std::filesystem::path folder_;
  AtomicWriteOptions options_;
  std::unique_ptr<Temporary> temporary_;  ///< null once committed
  std::string buffer_;
  std::size_t buffer_bytes_;
  std::uint64_t bytes_written_ = 0;
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

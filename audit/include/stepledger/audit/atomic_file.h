#pragma once
// Writing an output file so that no partial file is ever left behind (CONTRACT.md):
// the content goes to a temporary file in the same folder (same file system, so the final
// rename is atomic), is flushed and fsync'd, and only then takes the final name. The folder
// is fsync'd after the rename so that the new name survives a crash.
//
// Without overwrite, the final step is link(2) rather than rename(2): link fails when the
// name already exists, so two writers racing for the same name cannot clobber each other.

#include <filesystem>
#include <string_view>

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

}  // namespace stepledger

#pragma once
// Private: what tells one data file from another or from itself changed — device, inode, size
// and time of last change — taken by the scan (to refuse a file changed while it was read) and
// by a later pass (to re-read one record for a message only from the very file it scanned).
//
// Nothing outside engine/src includes this file.

#include <sys/stat.h>

#include <cerrno>
#include <cstdint>
#include <cstring>
#include <string>

#include "stepledger/engine/errors.h"

namespace stepledger {

struct FileIdentity {
  dev_t device = 0;
  ino_t inode = 0;
  std::uint64_t size = 0;
  std::int64_t modified_ns = 0;
  bool regular = false;
  /// Same file, unchanged (regular is a property of the file, not compared).
  bool operator==(const FileIdentity& other) const {
    return device == other.device && inode == other.inode && size == other.size &&
           modified_ns == other.modified_ns;
  }
};

/// The identity of an open file; throws InputError naming the file when fstat fails.
inline FileIdentity IdentityOf(int fd, const std::string& name) {
  struct stat status {};
  if (::fstat(fd, &status) != 0) {
    throw InputError("cannot read data file '" + name + "': " + std::strerror(errno));
  }
  FileIdentity identity;
  identity.device = status.st_dev;
  identity.inode = status.st_ino;
  identity.size = static_cast<std::uint64_t>(status.st_size);
  identity.modified_ns = static_cast<std::int64_t>(status.st_mtim.tv_sec) * 1000000000 + status.st_mtim.tv_nsec;
  identity.regular = S_ISREG(status.st_mode);
  return identity;
}

}  // namespace stepledger

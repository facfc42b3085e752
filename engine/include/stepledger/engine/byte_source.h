#pragma once
// The bytes of a data file, decompressed as they are read. A data file may be stored plain,
// gzip-compressed (RFC 1952, magic 1f 8b) or zstd-compressed (RFC 8878, magic 28 b5 2f fd); the
// encoding is told by the first stored bytes, never by the file name. Readers above (the CSV
// reader) see only the content; the observer sees the bytes as stored, so that the data
// fingerprint names the file exactly as it lies on disk.
//
// Streaming only: the source never seeks and never asks the file's size, so it reads pipes,
// FIFOs and /dev/stdin as well as regular files. Memory: one input block (kInputBlockBytes)
// plus the decoder's state (zlib: about 44 KiB; zstd: the frame's window, at most 128 MiB,
// the library's default limit, and a few MiB for ordinary levels).
//
// Concatenations are read whole: every member of a multi-member gzip file (what `cat a.gz
// b.gz` makes) and every frame of a multi-frame zstd file, in order, as one stream. Bytes after
// the last member that do not start another one are an error, not ignored.
//
// Errors are InputError naming the file and the offset in the stored bytes:
//   "FILE: cannot open: No such file or directory"
//   "FILE: cannot read at stored byte 4096: Input/output error"
//   "FILE: corrupt gzip stream at stored byte 1234: invalid block type"
//   "FILE: truncated zstd stream: the file ends at stored byte 77 inside a frame"

#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <memory>
#include <string_view>

namespace stepledger {

/// How a data file is stored.
enum class ByteEncoding { kPlain, kGzip, kZstd };
/// "plain", "gzip", "zstd": the words the audit records.
const char* ToString(ByteEncoding encoding);

class ByteSource {
 public:
  /// Stored bytes read from the file per read(2).
  static constexpr std::size_t kInputBlockBytes = std::size_t{1} << 18;

  /// Opens path and reads its first stored bytes to tell the encoding. Throws InputError
  /// naming path when it cannot be opened or read.
  explicit ByteSource(std::filesystem::path path);
  /// Reads an already-open descriptor (a pipe, a socket, a file); name is what messages call
  /// it. The descriptor is closed with the source when close_when_done, else left open.
  ByteSource(int fd, std::filesystem::path name, bool close_when_done = false);
  ~ByteSource();
  ByteSource(ByteSource&&) noexcept;
  ByteSource& operator=(ByteSource&&) noexcept;
  ByteSource(const ByteSource&) = delete;
  ByteSource& operator=(const ByteSource&) = delete;

  /// Up to capacity bytes of content (decompressed) into out; 0 only at the end of the content
  /// (or when capacity is 0). Blocks on a pipe until bytes come. Throws InputError on a read
  /// failure, a corrupt stream or a stream cut short, naming the file and the stored offset.
  std::size_t Read(char* out, std::size_t capacity);

  /// Called with every block of stored bytes, in file order, as it is read from the file
  /// (before decoding), the bytes that told the encoding included: the concatenation of the
  /// blocks is the file as stored. Set it before the first Read(): the bytes read so far are
  /// replayed to it at once. Throws std::logic_error after the first Read() (bytes would be
  /// missed). An empty function removes the observer.
  void SetStoredByteObserver(std::function<void(std::string_view)> observer);

  /// "plain", "gzip" or "zstd" (known from construction on).
  std::string_view encoding() const { return ToString(encoding_kind()); }
  ByteEncoding encoding_kind() const;
  /// Stored bytes read from the file so far; the file's stored size once Read() returned 0.
  std::uint64_t stored_bytes() const;
  /// Content bytes returned by Read() so far.
  std::uint64_t content_bytes() const;
  /// The path, or the name given with the descriptor.
  const std::filesystem::path& path() const;

 private:
  class Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace stepledger

#pragma once
// The data fingerprint: SHA-256 over the exact bytes read, computed in fixed-size blocks and
// combined, so that any number of readers (threads, MPI ranks reading block-aligned byte
// ranges) arrive at the same value.
//
//   fingerprint = SHA-256( H(block_0) || H(block_1) || ... || H(block_last) || le64(total) )
//
// where block_i are consecutive kBlockBytes-byte pieces of the file (the last may be shorter,
// and an empty file has no block), H is SHA-256 and le64 the byte count as 8 little-endian bytes.

#include <array>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace stepledger {

using Sha256Digest = std::array<unsigned char, 32>;

/// SHA-256 of a byte string (OpenSSL).
Sha256Digest Sha256(std::string_view bytes);
/// Lower-case hexadecimal of a digest.
std::string ToHex(const Sha256Digest& digest);

/// A running SHA-256 of bytes fed in pieces (the column digests of data in memory,
/// engine/column_source.h).
class Sha256Stream {
 public:
  Sha256Stream();
  ~Sha256Stream();
  Sha256Stream(const Sha256Stream&) = delete;
  Sha256Stream& operator=(const Sha256Stream&) = delete;
  Sha256Stream(Sha256Stream&& other) noexcept : context_(other.context_) { other.context_ = nullptr; }
  void Update(std::string_view bytes);
  /// The digest of everything fed; further Update() is a bug.
  Sha256Digest Finish();

 private:
  void* context_ = nullptr;  // EVP_MD_CTX
};

class DataFingerprint {
 public:
  static constexpr std::size_t kBlockBytes = 1 << 20;

  DataFingerprint();
  ~DataFingerprint();
  DataFingerprint(const DataFingerprint&) = delete;
  DataFingerprint& operator=(const DataFingerprint&) = delete;

  /// Feeds the next bytes of the file, in order, in pieces of any size.
  void Update(std::string_view bytes);
  /// The block digests so far (including a partial last block when finished).
  const std::vector<Sha256Digest>& block_digests() const { return blocks_; }
  std::uint64_t total_bytes() const { return total_; }
  /// Ends the input and returns the fingerprint as lower-case hex. Further Update() is a bug.
  std::string Finish();

  /// Combines block digests made elsewhere (e.g. by other readers) in file order.
  static std::string Combine(const std::vector<Sha256Digest>& blocks, std::uint64_t total_bytes);

 private:
  void CloseBlock();
  struct Context;
  Context* context_;  // the running SHA-256 of the current block
  std::vector<Sha256Digest> blocks_;
  std::size_t in_block_ = 0;
  std::uint64_t total_ = 0;
  bool finished_ = false;
};

}  // namespace stepledger

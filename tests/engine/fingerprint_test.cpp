#include "stepledger/engine/fingerprint.h"

#include <random>
#include <string>

#include <gtest/gtest.h>

namespace stepledger {
namespace {

// FIPS 180-2, Appendix B.1 and B.2: SHA-256 of "abc" and of the 448-bit message.
TEST(Sha256, PublishedTestVectors) {
  EXPECT_EQ(ToHex(Sha256("abc")),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(ToHex(Sha256("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq")),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  // Common practice: the digest of the empty string.
  EXPECT_EQ(ToHex(Sha256("")),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

std::string RandomBytes(std::size_t count, std::uint64_t seed) {
  std::mt19937_64 generator(seed);
  std::string bytes(count, '\0');
  for (auto& byte : bytes) byte = static_cast<char>(generator() & 0xff);
  return bytes;
}

std::string FingerprintInPieces(const std::string& bytes, std::size_t piece) {
  DataFingerprint fingerprint;
  for (std::size_t offset = 0; offset < bytes.size(); offset += piece) {
    fingerprint.Update(std::string_view(bytes).substr(offset, piece));
  }
  return fingerprint.Finish();
}

TEST(DataFingerprint, SameValueWhateverThePieceSize) {
  const std::string bytes = RandomBytes(DataFingerprint::kBlockBytes * 2 + 12345, 7);
  const std::string whole = FingerprintInPieces(bytes, bytes.size());
  for (std::size_t piece : {1ul << 10, 4097ul, DataFingerprint::kBlockBytes, 3ul << 20}) {
    EXPECT_EQ(FingerprintInPieces(bytes, piece), whole) << "piece " << piece;
  }
}

TEST(DataFingerprint, IndependentReadersOfBlockAlignedRangesAgree) {
  const std::string bytes = RandomBytes(DataFingerprint::kBlockBytes * 3 + 99, 11);
  const std::string expected = FingerprintInPieces(bytes, 65536);
  // Two readers: blocks [0, 2) and [2, end); their block digests concatenate.
  DataFingerprint first;
  DataFingerprint second;
  first.Update(std::string_view(bytes).substr(0, 2 * DataFingerprint::kBlockBytes));
  second.Update(std::string_view(bytes).substr(2 * DataFingerprint::kBlockBytes));
  first.Finish();
  second.Finish();
  auto blocks = first.block_digests();
  blocks.insert(blocks.end(), second.block_digests().begin(), second.block_digests().end());
  EXPECT_EQ(DataFingerprint::Combine(blocks, bytes.size()), expected);
}

TEST(DataFingerprint, AnyByteChangeChangesTheValue) {
  std::string bytes = RandomBytes(5000, 3);
  const std::string before = FingerprintInPieces(bytes, 100);
  bytes[4321] = static_cast<char>(bytes[4321] ^ 1);
  EXPECT_NE(FingerprintInPieces(bytes, 100), before);
  // Appending an empty-looking byte (a newline) changes it too.
  bytes[4321] = static_cast<char>(bytes[4321] ^ 1);
  EXPECT_NE(FingerprintInPieces(bytes + "\n", 100), before);
}

TEST(DataFingerprint, EmptyInputIsTheDigestOfTheZeroLength) {
  DataFingerprint fingerprint;
  // No blocks; the material is eight zero bytes (the length).
  EXPECT_EQ(fingerprint.Finish(), ToHex(Sha256(std::string(8, '\0'))));
}

}  // namespace
}  // namespace stepledger

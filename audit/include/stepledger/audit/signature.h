#pragma once
// Ed25519 signatures (RFC 8032) through OpenSSL, for the audit's optional `signature`.
// What a signature proves: that the holder of the private key produced these exact bytes.
// Unkeyed digests and seals only catch accidental and casual edits: anyone can recompute them.

#include <filesystem>
#include <string>
#include <string_view>

namespace stepledger {

/// A signer holding an Ed25519 private key.
class Ed25519Signer {
 public:
  /// Loads a PEM private key as `openssl genpkey -algorithm ed25519` writes it.
  /// Throws InputError naming the file when it cannot be read or is not an Ed25519 key.
  static Ed25519Signer FromPemFile(const std::filesystem::path& path);
  /// From the 32-byte raw private key given in hexadecimal (RFC 8032's test vectors).
  static Ed25519Signer FromRawPrivateKeyHex(std::string_view hex);

  Ed25519Signer(Ed25519Signer&& other) noexcept;
  Ed25519Signer& operator=(Ed25519Signer&& other) noexcept;
  Ed25519Signer(const Ed25519Signer&) = delete;
  Ed25519Signer& operator=(const Ed25519Signer&) = delete;
  ~Ed25519Signer();

  /// The 64-byte signature of message, hexadecimal.
  std::string SignHex(std::string_view message) const;
  /// The 32-byte raw public key, hexadecimal.
  std::string PublicKeyHex() const;

 private:
  explicit Ed25519Signer(void* key) : key_(key) {}
  void* key_ = nullptr;  // EVP_PKEY*
};

/// The raw 32-byte public key, lower-case hexadecimal, of a PEM public key file (or of the
/// public half of a PEM private key file). Throws InputError naming the file.
std::string Ed25519PublicKeyHexFromPemFile(const std::filesystem::path& path);

/// Checks an Ed25519 signature (hex) of message against a PEM public key file
/// (`openssl pkey -pubout`) — or a PEM private key file, whose public half is used.
/// Throws InputError when the key file cannot be used; returns false for a wrong signature.
bool VerifyEd25519WithPemFile(const std::filesystem::path& public_key_path,
                              std::string_view message, std::string_view signature_hex);
/// The same against a raw 32-byte public key in hexadecimal.
bool VerifyEd25519WithRawKeyHex(std::string_view public_key_hex, std::string_view message,
                                std::string_view signature_hex);

}  // namespace stepledger

#pragma once
// Ed25519 signatures (RFC 8032) through OpenSSL, for the audit's optional `signature`.
// What a signature proves: that the holder of the private key produced these exact bytes.
// Unkeyed digests and seals only catch accidental and casual edits: anyone can recompute them.
// The audit carries the signature as a JWS (audit/jws.h); this file holds the keys and the
// Ed25519 operations under it.

#include <filesystem>
#include <string>
#include <string_view>

namespace stepledger {

/// An Ed25519 public key: its 32 raw bytes (RFC 8032 §5.1.5).
class Ed25519PublicKey {
 public:
  /// From the 32 raw bytes. Throws InputError (what: "an Ed25519 public key") for another length.
  static Ed25519PublicKey FromRaw(std::string_view raw);
  /// From 64 hexadecimal digits (either case). Throws InputError.
  static Ed25519PublicKey FromHex(std::string_view hex);

  const std::string& raw() const { return raw_; }
  /// Lower-case hexadecimal (the shape audits of format_version 3 and earlier record).
  std::string Hex() const;
  /// Whether signature (64 raw bytes) is this key's Ed25519 signature of message. A signature
  /// of another length is simply not valid.
  bool Verifies(std::string_view message, std::string_view signature) const;

  friend bool operator==(const Ed25519PublicKey& a, const Ed25519PublicKey& b) { return a.raw_ == b.raw_; }
  friend bool operator!=(const Ed25519PublicKey& a, const Ed25519PublicKey& b) { return !(a == b); }

 private:
  explicit Ed25519PublicKey(std::string raw) : raw_(std::move(raw)) {}
  std::string raw_;
};

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

  /// The 64-byte signature of message (raw bytes). Ed25519 is deterministic: the same key and
  /// message always give the same signature (RFC 8032 §5.1.6).
  std::string Sign(std::string_view message) const;
  /// The 64-byte signature of message, hexadecimal.
  std::string SignHex(std::string_view message) const;
  /// The public half.
  Ed25519PublicKey PublicKey() const;
  /// The 32-byte raw public key, hexadecimal.
  std::string PublicKeyHex() const;

 private:
  explicit Ed25519Signer(void* key) : key_(key) {}
  void* key_ = nullptr;  // EVP_PKEY*
};

/// The Ed25519 public key of a PEM file: a public key (`openssl pkey -pubout`) or a private key,
/// whose public half is taken. Throws InputError naming the file, and the key type it holds when
/// that is not Ed25519 ("key file 'k.pem' holds an RSA key, not an Ed25519 key").
Ed25519PublicKey Ed25519PublicKeyFromPemFile(const std::filesystem::path& path);

/// Checks an Ed25519 signature (hex) of message against a raw 32-byte public key in hexadecimal
/// (the signature of audits of format_version 3 and earlier). Throws InputError when the key is
/// not 64 hex digits; returns false for a wrong or malformed signature.
bool VerifyEd25519WithRawKeyHex(std::string_view public_key_hex, std::string_view message,
                                std::string_view signature_hex);

}  // namespace stepledger

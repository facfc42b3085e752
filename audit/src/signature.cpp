#include "stepledger/audit/signature.h"

#include <cstdio>
#include <memory>
#include <utility>
#include <vector>

#include <openssl/err.h>
#include <openssl/evp.h>
#include <openssl/pem.h>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

std::string OpenSslError() {
  unsigned long code = ERR_get_error();
  if (code == 0) return "unknown OpenSSL error";
  char text[256];
  ERR_error_string_n(code, text, sizeof text);
  ERR_clear_error();
  return text;
}

std::vector<unsigned char> DecodeHex(std::string_view hex, const char* what) {
  auto value = [](char c) -> int {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    return -1;
  };
  if (hex.size() % 2 != 0) throw InputError(std::string(what) + ": odd number of hex digits");
  std::vector<unsigned char> bytes(hex.size() / 2);
  for (std::size_t i = 0; i < bytes.size(); ++i) {
    int high = value(hex[2 * i]);
    int low = value(hex[2 * i + 1]);
    if (high < 0 || low < 0) throw InputError(std::string(what) + ": not hexadecimal");
    bytes[i] = static_cast<unsigned char>(high * 16 + low);
  }
  return bytes;
}

std::string ToHexBytes(const unsigned char* bytes, std::size_t count) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string text;
  for (std::size_t i = 0; i < count; ++i) {
    text.push_back(kHex[bytes[i] >> 4]);
    text.push_back(kHex[bytes[i] & 0x0f]);
  }
  return text;
}

struct KeyDeleter {
  void operator()(EVP_PKEY* key) const { EVP_PKEY_free(key); }
};
using KeyPointer = std::unique_ptr<EVP_PKEY, KeyDeleter>;

struct FileCloser {
  void operator()(FILE* file) const { std::fclose(file); }
};

KeyPointer ReadPemKey(const std::filesystem::path& path, bool want_private) {
  std::unique_ptr<FILE, FileCloser> file(std::fopen(path.c_str(), "rb"));
  if (!file) throw InputError("cannot open key file '" + path.string() + "'");
  EVP_PKEY* key = want_private ? PEM_read_PrivateKey(file.get(), nullptr, nullptr, nullptr)
                               : PEM_read_PUBKEY(file.get(), nullptr, nullptr, nullptr);
  if (key == nullptr && !want_private) {
    // A private key file also holds the public key: accept it.
    std::rewind(file.get());
    ERR_clear_error();
    key = PEM_read_PrivateKey(file.get(), nullptr, nullptr, nullptr);
  }
  if (key == nullptr) {
    throw InputError("key file '" + path.string() + "' holds no PEM " +
                     (want_private ? "private" : "public") + " key (" + OpenSslError() + ")");
  }
  KeyPointer owned(key);
  if (EVP_PKEY_id(key) != EVP_PKEY_ED25519) {
    // Name what the file holds, so that a user who passed an RSA or EC key sees why.
    const char* type = EVP_PKEY_get0_type_name(key);
    throw InputError("key file '" + path.string() + "' holds " +
                     (type != nullptr ? std::string("an ") + type + " key" : std::string("a key")) +
                     ", not an Ed25519 key (RFC 8032)");
  }
  return owned;
}

bool VerifyBytes(EVP_PKEY* key, std::string_view message, const unsigned char* signature, std::size_t length) {
  EVP_MD_CTX* context = EVP_MD_CTX_new();
  if (context == nullptr) throw NumericalError("OpenSSL could not allocate a context");
  bool ok = EVP_DigestVerifyInit(context, nullptr, nullptr, nullptr, key) == 1 &&
            EVP_DigestVerify(context, signature, length,
                             reinterpret_cast<const unsigned char*>(message.data()),
                             message.size()) == 1;
  EVP_MD_CTX_free(context);
  ERR_clear_error();
  return ok;
}

std::string RawPublicKey(EVP_PKEY* key, const std::string& what) {
  unsigned char raw[32];
  std::size_t length = sizeof raw;
  if (EVP_PKEY_get_raw_public_key(key, raw, &length) != 1 || length != sizeof raw) {
    throw InputError(what + ": cannot read its Ed25519 public key (" + OpenSslError() + ")");
  }
  return std::string(reinterpret_cast<const char*>(raw), length);
}

}  // namespace

Ed25519Signer Ed25519Signer::FromPemFile(const std::filesystem::path& path) {
  return Ed25519Signer(ReadPemKey(path, true).release());
}

Ed25519Signer Ed25519Signer::FromRawPrivateKeyHex(std::string_view hex) {
  auto raw = DecodeHex(hex, "private key");
  EVP_PKEY* key = EVP_PKEY_new_raw_private_key(EVP_PKEY_ED25519, nullptr, raw.data(), raw.size());
  if (key == nullptr) throw InputError("not a 32-byte Ed25519 private key (" + OpenSslError() + ")");
  return Ed25519Signer(key);
}

Ed25519Signer::Ed25519Signer(Ed25519Signer&& other) noexcept : key_(other.key_) {
  other.key_ = nullptr;
}

Ed25519Signer& Ed25519Signer::operator=(Ed25519Signer&& other) noexcept {
  if (this != &other) {
    EVP_PKEY_free(static_cast<EVP_PKEY*>(key_));
    key_ = other.key_;
    other.key_ = nullptr;
  }
  return *this;
}

Ed25519Signer::~Ed25519Signer() { EVP_PKEY_free(static_cast<EVP_PKEY*>(key_)); }

std::string Ed25519Signer::Sign(std::string_view message) const {
  EVP_MD_CTX* context = EVP_MD_CTX_new();
  if (context == nullptr) throw NumericalError("OpenSSL could not allocate a context");
  unsigned char signature[64];
  std::size_t length = sizeof signature;
  bool ok = EVP_DigestSignInit(context, nullptr, nullptr, nullptr,
                               static_cast<EVP_PKEY*>(key_)) == 1 &&
            EVP_DigestSign(context, signature, &length,
                           reinterpret_cast<const unsigned char*>(message.data()),
                           message.size()) == 1;
  EVP_MD_CTX_free(context);
  if (!ok) throw NumericalError("Ed25519 signing failed: " + OpenSslError());
  return std::string(reinterpret_cast<const char*>(signature), length);
}

std::string Ed25519Signer::SignHex(std::string_view message) const {
  const std::string signature = Sign(message);
  return ToHexBytes(reinterpret_cast<const unsigned char*>(signature.data()), signature.size());
}

Ed25519PublicKey Ed25519Signer::PublicKey() const {
  return Ed25519PublicKey::FromRaw(RawPublicKey(static_cast<EVP_PKEY*>(key_), "the signing key"));
}

std::string Ed25519Signer::PublicKeyHex() const { return PublicKey().Hex(); }

Ed25519PublicKey Ed25519PublicKey::FromRaw(std::string_view raw) {
  if (raw.size() != 32) {
    throw InputError("an Ed25519 public key has 32 bytes, not " + std::to_string(raw.size()));
  }
  return Ed25519PublicKey(std::string(raw));
}

Ed25519PublicKey Ed25519PublicKey::FromHex(std::string_view hex) {
  const std::vector<unsigned char> bytes = DecodeHex(hex, "public key");
  return FromRaw(std::string_view(reinterpret_cast<const char*>(bytes.data()), bytes.size()));
}

std::string Ed25519PublicKey::Hex() const {
  return ToHexBytes(reinterpret_cast<const unsigned char*>(raw_.data()), raw_.size());
}

bool Ed25519PublicKey::Verifies(std::string_view message, std::string_view signature) const {
  KeyPointer key(EVP_PKEY_new_raw_public_key(EVP_PKEY_ED25519, nullptr,
                                             reinterpret_cast<const unsigned char*>(raw_.data()), raw_.size()));
  if (!key) throw NumericalError("OpenSSL refused a 32-byte Ed25519 public key: " + OpenSslError());
  return VerifyBytes(key.get(), message, reinterpret_cast<const unsigned char*>(signature.data()),
                     signature.size());
}

Ed25519PublicKey Ed25519PublicKeyFromPemFile(const std::filesystem::path& path) {
  KeyPointer key = ReadPemKey(path, false);
  return Ed25519PublicKey::FromRaw(RawPublicKey(key.get(), "key file '" + path.string() + "'"));
}

bool VerifyEd25519WithRawKeyHex(std::string_view public_key_hex, std::string_view message,
                                std::string_view signature_hex) {
  const Ed25519PublicKey key = Ed25519PublicKey::FromHex(public_key_hex);
  std::vector<unsigned char> signature;
  try {
    signature = DecodeHex(signature_hex, "signature");
  } catch (const InputError&) {
    return false;  // a malformed signature is one that does not verify
  }
  return key.Verifies(message, std::string_view(reinterpret_cast<const char*>(signature.data()), signature.size()));
}

}  // namespace stepledger

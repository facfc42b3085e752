#include "stepledger/audit/jws.h"

#include <openssl/evp.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"
#include "stepledger/io/json_reader.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

bool IsBase64UrlCharacter(char c) {
  return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '-' || c == '_';
}

std::string Shown(const json& value) {
  std::string text = value.dump();
  if (text.size() > 60) text = text.substr(0, 57) + "...";
  return text;
}

const char* TypeName(const json& value) {
  // nlohmann's type_name() says "number" for every number; that is what a reader needs.
  return value.type_name();
}

}  // namespace

std::string Base64UrlEncode(std::string_view bytes) {
  // OpenSSL counts in int; callers encode headers, keys, seals and signatures only.
  if (bytes.size() > (std::size_t{1} << 29)) throw InputError("base64url of more than 2^29 bytes is not written here");
  // OpenSSL writes standard base64 (RFC 4648 §4) with padding; RFC 7515 §2 wants the URL-safe
  // alphabet (§5) without it.
  std::string text(4 * ((bytes.size() + 2) / 3) + 1, '\0');
  const int written = EVP_EncodeBlock(reinterpret_cast<unsigned char*>(text.data()),
                                      reinterpret_cast<const unsigned char*>(bytes.data()),
                                      static_cast<int>(bytes.size()));
  text.resize(static_cast<std::size_t>(written));
  while (!text.empty() && text.back() == '=') text.pop_back();
  for (char& c : text) {
    if (c == '+') c = '-';
    else if (c == '/') c = '_';
  }
  return text;
}

std::string Base64UrlDecode(std::string_view text) {
  // OpenSSL counts in int; nothing this tool reads (a header, a key, a signature) comes near.
  constexpr std::size_t kMaxText = std::size_t{1} << 30;
  if (text.size() > kMaxText) throw InputError("not base64url this tool reads: longer than 2^30 characters");
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (!IsBase64UrlCharacter(text[i])) {
      const unsigned char c = static_cast<unsigned char>(text[i]);
      std::string shown = c >= 0x20 && c < 0x7f ? std::string("'") + text[i] + "'"
                                               : "byte " + std::to_string(static_cast<int>(c));
      throw InputError("not base64url without padding (RFC 7515 §2): " + shown + " at character " +
                       std::to_string(i + 1));
    }
  }
  if (text.size() % 4 == 1) {
    throw InputError("not base64url without padding (RFC 7515 §2): a length of " + std::to_string(text.size()) +
                     " characters (1 more than a multiple of 4) encodes no whole byte");
  }
  std::string standard(text);
  for (char& c : standard) {
    if (c == '-') c = '+';
    else if (c == '_') c = '/';
  }
  const std::size_t padding = (4 - standard.size() % 4) % 4;
  standard.append(padding, '=');
  std::string bytes(3 * (standard.size() / 4) + 1, '\0');
  const int decoded = EVP_DecodeBlock(reinterpret_cast<unsigned char*>(bytes.data()),
                                      reinterpret_cast<const unsigned char*>(standard.data()),
                                      static_cast<int>(standard.size()));
  if (decoded < 0) throw InputError("not base64url without padding (RFC 7515 §2)");
  // EVP_DecodeBlock counts the padding as zero bytes.
  bytes.resize(static_cast<std::size_t>(decoded) - padding);
  // Unused low bits of the last character must be zero, else two texts name the same bytes.
  if (Base64UrlEncode(bytes) != text) {
    throw InputError("not base64url without padding (RFC 7515 §2): the last character carries bits that "
                     "encode nothing (not the canonical encoding)");
  }
  return bytes;
}

json Ed25519Jwk(const Ed25519PublicKey& key) {
  // nlohmann's object keeps keys sorted: crv, kty, x — RFC 7638's order as well.
  return {{"crv", "Ed25519"}, {"kty", "OKP"}, {"x", Base64UrlEncode(key.raw())}};
}

std::string JwkThumbprint(const Ed25519PublicKey& key) {
  // Written out rather than dumped: the thumbprint's input is fixed by RFC 7638 §3.2 and must
  // not follow a JSON library's formatting choices.
  const std::string members = "{\"crv\":\"Ed25519\",\"kty\":\"OKP\",\"x\":\"" + Base64UrlEncode(key.raw()) + "\"}";
  const Sha256Digest digest = Sha256(members);
  return Base64UrlEncode(std::string_view(reinterpret_cast<const char*>(digest.data()), digest.size()));
}

Ed25519PublicKey Ed25519PublicKeyFromJwk(const json& jwk, const std::string& where, const std::string& key_prefix) {
  auto fail = [&](const std::string& member, const std::string& what) -> InputError {
    return InputError(where + "key '" + key_prefix + member + "' " + what);
  };
  if (!jwk.is_object()) {
    std::string whole = key_prefix.empty() ? std::string() : "key '" + key_prefix.substr(0, key_prefix.size() - 1) + "': ";
    throw InputError(where + whole + "expected a JWK (a JSON object, RFC 7517), found " + TypeName(jwk));
  }
  if (!jwk.contains("kty") && jwk.contains("keys")) {
    throw InputError(where + "a JWK Set (key '" + key_prefix + "keys'): give a file holding the one public key");
  }
  auto member = [&](const char* name, const char* expected, const char* why) {
    if (!jwk.contains(name)) throw fail(name, std::string("is missing: expected \"") + expected + "\"" + why);
    const json& value = jwk.at(name);
    if (value != json(expected)) throw fail(name, "is " + Shown(value) + ", expected \"" + expected + "\"" + why);
  };
  member("kty", "OKP", " (an Ed25519 key is an octet key pair, RFC 8037 §2)");
  member("crv", "Ed25519", " (an Ed25519 signing key, RFC 8037)");
  if (jwk.contains("alg")) member("alg", "EdDSA", " (the algorithm of Ed25519 signatures, RFC 8037 §3.1)");
  if (jwk.contains("use")) member("use", "sig", " (a key for signatures, RFC 7517 §4.2)");
  if (!jwk.contains("x")) throw fail("x", "is missing: expected the public key, 32 bytes in base64url");
  const json& x = jwk.at("x");
  if (!x.is_string()) throw fail("x", std::string("is a ") + TypeName(x) + ", expected a base64url string");
  std::string raw;
  try {
    raw = Base64UrlDecode(x.get_ref<const std::string&>());
  } catch (const InputError& error) {
    throw fail("x", std::string("is ") + error.what());
  }
  if (raw.size() != 32) {
    throw fail("x", "decodes to " + std::to_string(raw.size()) + " bytes; an Ed25519 public key has 32");
  }
  return Ed25519PublicKey::FromRaw(raw);
}

Ed25519PublicKey ReadEd25519PublicKeyFile(const std::filesystem::path& path) {
  const std::string text = ReadWholeFile(path, "key file");
  const std::size_t first = text.find_first_not_of(" \t\r\n");
  if (first != std::string::npos && text[first] == '{') {
    // ParseStrictJson names line and column, and refuses duplicate members (two "x" would let
    // two readers see two keys).
    const json jwk = ParseStrictJson(text, path.string());
    return Ed25519PublicKeyFromJwk(jwk, "key file '" + path.string() + "': ");
  }
  if (first != std::string::npos && text.compare(first, 10, "-----BEGIN") == 0) {
    return Ed25519PublicKeyFromPemFile(path);
  }
  throw InputError("key file '" + path.string() +
                   "' is neither PEM (-----BEGIN ...) nor a JWK (a JSON object, RFC 7517)");
}

std::string AuditJwsProtectedHeader(const Ed25519PublicKey& key) {
  // Written out, like the thumbprint: the bytes signed must not depend on a JSON library's
  // formatting. The thumbprint is base64url: nothing in it needs escaping.
  return "{\"alg\":\"EdDSA\",\"kid\":\"" + JwkThumbprint(key) + "\"}";
}

std::string SignCompactJws(const Ed25519Signer& signer, std::string_view header_json, std::string_view payload) {
  const std::string encoded_payload = Base64UrlEncode(payload);
  const std::string signing_input = Base64UrlEncode(header_json) + "." + encoded_payload;
  return signing_input + "." + Base64UrlEncode(signer.Sign(signing_input));
}

std::string SignDetachedJws(const Ed25519Signer& signer, std::string_view header_json, std::string_view payload) {
  const std::string encoded_header = Base64UrlEncode(header_json);
  const std::string signing_input = encoded_header + "." + Base64UrlEncode(payload);
  return encoded_header + ".." + Base64UrlEncode(signer.Sign(signing_input));
}

CompactJws ParseCompactJws(std::string_view text) {
  const std::size_t first_dot = text.find('.');
  const std::size_t second_dot = first_dot == std::string_view::npos ? first_dot : text.find('.', first_dot + 1);
  if (second_dot == std::string_view::npos || text.find('.', second_dot + 1) != std::string_view::npos) {
    throw InputError("is not a JWS compact serialisation (three base64url parts joined by '.', RFC 7515 §7.1)");
  }
  CompactJws jws;
  jws.encoded_header = std::string(text.substr(0, first_dot));
  jws.encoded_payload = std::string(text.substr(first_dot + 1, second_dot - first_dot - 1));
  const std::string_view encoded_signature = text.substr(second_dot + 1);
  std::string header_text;
  try {
    header_text = Base64UrlDecode(jws.encoded_header);
  } catch (const InputError& error) {
    throw InputError(std::string("has a protected header that is ") + error.what());
  }
  try {
    Base64UrlDecode(jws.encoded_payload);
  } catch (const InputError& error) {
    throw InputError(std::string("has a payload part that is ") + error.what());
  }
  try {
    jws.signature = Base64UrlDecode(encoded_signature);
  } catch (const InputError& error) {
    throw InputError(std::string("has a signature part that is ") + error.what());
  }
  try {
    jws.header = ParseStrictJson(header_text, "protected header");
  } catch (const InputError& error) {
    throw InputError(std::string("has a protected header that is not JSON (") + error.what() + ")");
  }
  if (!jws.header.is_object()) {
    throw InputError(std::string("has a protected header that is a JSON ") + TypeName(jws.header) +
                     ", not an object (RFC 7515 §4)");
  }
  return jws;
}

bool VerifyJws(const CompactJws& jws, std::string_view payload, const Ed25519PublicKey& key) {
  const std::string encoded_payload = Base64UrlEncode(payload);
  if (!jws.encoded_payload.empty() && jws.encoded_payload != encoded_payload) return false;
  return key.Verifies(jws.encoded_header + "." + encoded_payload, jws.signature);
}

std::string CheckJwsHeader(const json& header) {
  if (!header.contains("alg")) return "protected header has no 'alg' (RFC 7515 §4.1.1)";
  if (header.at("alg") != json("EdDSA")) {
    return "protected header 'alg' is " + Shown(header.at("alg")) +
           "; this tool signs and verifies \"EdDSA\" with Ed25519 keys only (RFC 8037 §3.1)";
  }
  if (header.contains("crit")) {
    return "protected header 'crit' is " + Shown(header.at("crit")) +
           ": it names extensions this tool does not process, so it must refuse the JWS (RFC 7515 §4.1.11)";
  }
  if (!header.contains("kid")) return "protected header has no 'kid' (the RFC 7638 thumbprint of the signing key)";
  if (!header.at("kid").is_string()) return "protected header 'kid' is " + Shown(header.at("kid")) + ", not a string";
  return "";
}

}  // namespace stepledger

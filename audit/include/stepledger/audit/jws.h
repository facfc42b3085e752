#pragma once
// The audit's signature in open standards, so that any JOSE library can check it:
//   - a JWS (RFC 7515) in its compact serialisation with a detached payload (RFC 7515
//     Appendix F: the middle part is empty, the payload travels elsewhere — here it is the
//     audit's seal);
//   - `alg` EdDSA over Ed25519 (RFC 8037 §3.1), no other algorithm accepted;
//   - the public key as a JWK (RFC 7517) of kty OKP, crv Ed25519 (RFC 8037 §2), identified by
//     its JWK thumbprint (RFC 7638), which the protected header carries as `kid`.
//
// The bytes signed are RFC 7515 §5.1's signing input,
//   ASCII(BASE64URL(UTF8(protected header)) || '.' || BASE64URL(payload)),
// and for an audit the payload is the seal's text exactly as the audit writes it: the 64
// lower-case hexadecimal ASCII characters of `seal`, without quotes or line end
// (audit_document.h). base64url is RFC 7515 §2's: the URL-safe alphabet of RFC 4648 §5,
// no padding, no white space.
//
// Parsing is strict: what a reader here refuses (padding, the standard alphabet, a header that
// is not a JSON object, unknown critical extensions) it names, and nothing is guessed.

#include <filesystem>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/audit/signature.h"

namespace stepledger {

/// RFC 7515 §2 base64url of bytes, without padding.
std::string Base64UrlEncode(std::string_view bytes);
/// The bytes of base64url text. Throws InputError (whose text starts "not base64url") for a
/// character outside A-Z a-z 0-9 '-' '_' (so for padding '=' and the standard '+' '/'), a length
/// of 1 modulo 4, or unused trailing bits that are not zero (two texts never decode to the same
/// bytes). O(length).
std::string Base64UrlDecode(std::string_view text);

/// The public key as a JWK: {"crv":"Ed25519","kty":"OKP","x":BASE64URL(32 raw bytes)}.
nlohmann::json Ed25519Jwk(const Ed25519PublicKey& key);
/// RFC 7638 thumbprint: BASE64URL(SHA-256(UTF8({"crv":"Ed25519","kty":"OKP","x":"..."}))), the
/// required members of an OKP key in lexicographic order with no white space (RFC 7638 §3.2,
/// RFC 8037 §2).
std::string JwkThumbprint(const Ed25519PublicKey& key);

/// The Ed25519 public key of a JWK. `where` starts every message ("key file 'k.jwk': " or ""),
/// `key_prefix` prefixes every member name ("" or "signature.jwk."): "key file 'k.jwk': key 'crv'
/// is \"X25519\", expected \"Ed25519\" (an Ed25519 signing key, RFC 8037)". Requires kty "OKP",
/// crv "Ed25519" and x (32 bytes in base64url); `alg`, when present, must be "EdDSA" and `use`
/// "sig". A private member `d` is ignored (the public half is used). Throws InputError.
Ed25519PublicKey Ed25519PublicKeyFromJwk(const nlohmann::json& jwk, const std::string& where,
                                         const std::string& key_prefix = "");

/// The key file of `verify --public-key`, told apart by its content: a JWK (the first
/// character that is not white space is '{'), or PEM (`-----BEGIN`), a public key or a private
/// key whose public half is used. Throws InputError naming the file (and, for a JWK, the member
/// and the line and column of malformed JSON).
Ed25519PublicKey ReadEd25519PublicKeyFile(const std::filesystem::path& path);

/// The protected header the audit's signature carries, as signed: exactly
/// {"alg":"EdDSA","kid":THUMBPRINT} — members in this (lexicographic) order, no white space —
/// so that the same key and seal always give the same JWS.
std::string AuditJwsProtectedHeader(const Ed25519PublicKey& key);

/// BASE64URL(header_json) '.' BASE64URL(payload) '.' BASE64URL(Ed25519(signing input)), with
/// header_json signed exactly as given (RFC 7515 §5.1, compact serialisation §7.1).
std::string SignCompactJws(const Ed25519Signer& signer, std::string_view header_json, std::string_view payload);
/// The same with the payload part left empty (RFC 7515 Appendix F); the signature still
/// covers BASE64URL(payload).
std::string SignDetachedJws(const Ed25519Signer& signer, std::string_view header_json, std::string_view payload);

/// A compact JWS taken apart.
struct CompactJws {
  std::string encoded_header;     ///< first part, as written (the signing input uses it as is)
  std::string encoded_payload;    ///< second part: empty when the payload is detached
  std::string signature;          ///< third part decoded (raw bytes)
  nlohmann::json header;          ///< the protected header, parsed (a JSON object)
};

/// Splits and decodes a compact serialisation. Throws InputError (the text names what is wrong:
/// the number of parts, the part that is not base64url, a header that is not a JSON object).
CompactJws ParseCompactJws(std::string_view text);

/// Whether jws is key's EdDSA signature over payload: the header's `alg` must be "EdDSA" (checked
/// by the caller, see CheckJwsHeader) and the signing input is built from the encoded header as
/// written and BASE64URL(payload) (for a detached JWS) or the encoded payload (which must then
/// be BASE64URL(payload)).
bool VerifyJws(const CompactJws& jws, std::string_view payload, const Ed25519PublicKey& key);

/// What this tool accepts in a protected header: `alg` "EdDSA", no `crit` (RFC 7515 §4.1.11:
/// an extension this tool does not process must be refused), `kid` a string. Returns an empty
/// string when it holds, else what is wrong ("protected header 'alg' is \"ES256\", ...").
std::string CheckJwsHeader(const nlohmann::json& header);

}  // namespace stepledger

#include "stepledger/audit/jws.h"

#include <gtest/gtest.h>

#include <functional>
#include <string>
#include <utility>

#include "stepledger/engine/errors.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

// RFC 8037 Appendix A (A.1 key, A.3 thumbprint, A.4 signing, A.5 verification). The values were
// recalled from memory and agree with the copies of Appendix A quoted in the test suites of
// several independent JOSE implementations (the RFC page itself could not be opened here);
// reproducing the A.4 signature byte for byte below is the check that they are right, and
// tests/audit/jws_interop_test.py has Debian's python3-jwcrypto compute the A.3 thumbprint and
// the A.4 JWS from the A.1 key as well.
// The A.1 private key is RFC 8032 §7.1 TEST 1's (tests/audit/signature_test.cpp).
constexpr const char* kRfc8037D = "nWGxne_9WmC6hEr0kuwsxERJxWl7MmkZcDusAxyuf2A";
constexpr const char* kRfc8037X = "11qYAYKxCrfVS_7TyWQHOg7hcvPapiMlrwIaaPcHURo";
constexpr const char* kRfc8037PrivateHex = "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60";
constexpr const char* kRfc8037Thumbprint = "kPrK_qmxVWaYVA9wwBF6Iuo3vVzz7TxHCTwXBygrS4k";
constexpr const char* kRfc8037Payload = "Example of Ed25519 signing";
constexpr const char* kRfc8037Compact =
    "eyJhbGciOiJFZERTQSJ9.RXhhbXBsZSBvZiBFZDI1NTE5IHNpZ25pbmc."
    "hgyY0il_MGCjP0JzlnLWG1PPOt7-09PGcvMg3AIbQR6dWbhijcNR4ki4iylGjg5BhVsPt9g7sVvpAr_MuM0KAg";

std::string ToHex(const std::string& bytes) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string text;
  for (unsigned char c : bytes) {
    text.push_back(kHex[c >> 4]);
    text.push_back(kHex[c & 0x0f]);
  }
  return text;
}

std::string MessageOf(const std::function<void()>& action) {
  try {
    action();
  } catch (const InputError& error) {
    return error.what();
  }
  return "(no error)";
}

// RFC 4648 §10 test vectors (base64; without padding they are base64url's too).
TEST(Base64Url, Rfc4648TestVectorsWithoutPadding) {
  const std::pair<const char*, const char*> vectors[] = {{"", ""},         {"f", "Zg"},        {"fo", "Zm8"},
                                                         {"foo", "Zm9v"},  {"foob", "Zm9vYg"}, {"fooba", "Zm9vYmE"},
                                                         {"foobar", "Zm9vYmFy"}};
  for (const auto& [bytes, text] : vectors) {
    EXPECT_EQ(Base64UrlEncode(bytes), text) << bytes;
    EXPECT_EQ(Base64UrlDecode(text), bytes) << text;
  }
}

// RFC 4648 §5: '-' and '_' stand for 62 and 63 ('+' and '/' in standard base64).
TEST(Base64Url, UsesTheUrlSafeAlphabet) {
  EXPECT_EQ(Base64UrlEncode(std::string("\xfb\xff", 2)), "-_8");
  EXPECT_EQ(Base64UrlDecode("-_8"), std::string("\xfb\xff", 2));
  // Every byte value survives the round trip.
  std::string all;
  for (int c = 0; c < 256; ++c) all.push_back(static_cast<char>(c));
  EXPECT_EQ(Base64UrlDecode(Base64UrlEncode(all)), all);
}

TEST(Base64Url, RefusesWhatRfc7515Section2Excludes) {
  EXPECT_NE(MessageOf([] { Base64UrlDecode("Zg=="); }).find("'=' at character 3"), std::string::npos);
  EXPECT_NE(MessageOf([] { Base64UrlDecode("+_8"); }).find("'+' at character 1"), std::string::npos);
  EXPECT_NE(MessageOf([] { Base64UrlDecode("Zm9v/"); }).find("'/'"), std::string::npos);
  EXPECT_NE(MessageOf([] { Base64UrlDecode("Zm 9v"); }).find("' ' at character 3"), std::string::npos);
  EXPECT_NE(MessageOf([] { Base64UrlDecode("Zm9vY"); }).find("1 more than a multiple of 4"), std::string::npos);
  // "Zh" decodes to 'f' as "Zg" does, with non-zero bits that encode nothing: not canonical.
  EXPECT_NE(MessageOf([] { Base64UrlDecode("Zh"); }).find("not the canonical encoding"), std::string::npos);
  EXPECT_EQ(MessageOf([] { Base64UrlDecode("Zg"); }), "(no error)");
}

TEST(Rfc8037, A1PublicKeyFromThePrivateKey) {
  EXPECT_EQ(ToHex(Base64UrlDecode(kRfc8037D)), kRfc8037PrivateHex);
  const Ed25519Signer signer = Ed25519Signer::FromRawPrivateKeyHex(kRfc8037PrivateHex);
  EXPECT_EQ(Base64UrlEncode(signer.PublicKey().raw()), kRfc8037X);
  EXPECT_EQ(Ed25519Jwk(signer.PublicKey()), json({{"kty", "OKP"}, {"crv", "Ed25519"}, {"x", kRfc8037X}}));
}

TEST(Rfc8037, A3Thumbprint) {
  const Ed25519PublicKey key = Ed25519PublicKey::FromRaw(Base64UrlDecode(kRfc8037X));
  EXPECT_EQ(JwkThumbprint(key), kRfc8037Thumbprint);
  // RFC 7638 §3.2: the hash input is {"crv":"Ed25519","kty":"OKP","x":"..."} (members sorted,
  // no white space); the A.3 SHA-256 in hex, from memory, is the thumbprint decoded.
  EXPECT_EQ(ToHex(Base64UrlDecode(kRfc8037Thumbprint)),
            "90facafea9b1556698540f70c0117a22ea37bd5cf3ed3c47093c1707282b4b89");
}

TEST(Rfc8037, A4SigningReproducesThePublishedJws) {
  const Ed25519Signer signer = Ed25519Signer::FromRawPrivateKeyHex(kRfc8037PrivateHex);
  EXPECT_EQ(SignCompactJws(signer, R"({"alg":"EdDSA"})", kRfc8037Payload), kRfc8037Compact);
}

TEST(Rfc8037, A5VerificationAndTheDetachedForm) {
  const Ed25519PublicKey key = Ed25519PublicKey::FromRaw(Base64UrlDecode(kRfc8037X));
  const CompactJws published = ParseCompactJws(kRfc8037Compact);
  EXPECT_EQ(published.header, json({{"alg", "EdDSA"}}));
  EXPECT_TRUE(VerifyJws(published, kRfc8037Payload, key));
  EXPECT_FALSE(VerifyJws(published, "Example of Ed25519 signinG", key)) << "the attached payload must be the one given";
  // RFC 7515 Appendix F: the same JWS with its payload part emptied verifies against the
  // payload supplied from elsewhere, and signing detached gives exactly that text.
  const std::string detached = "eyJhbGciOiJFZERTQSJ9.."
                               "hgyY0il_MGCjP0JzlnLWG1PPOt7-09PGcvMg3AIbQR6dWbhijcNR4ki4iylGjg5BhVsPt9g7sVvpAr_MuM0KAg";
  const Ed25519Signer signer = Ed25519Signer::FromRawPrivateKeyHex(kRfc8037PrivateHex);
  EXPECT_EQ(SignDetachedJws(signer, R"({"alg":"EdDSA"})", kRfc8037Payload), detached);
  const CompactJws parsed = ParseCompactJws(detached);
  EXPECT_TRUE(parsed.encoded_payload.empty());
  EXPECT_TRUE(VerifyJws(parsed, kRfc8037Payload, key));
  EXPECT_FALSE(VerifyJws(parsed, "Example of Ed25519 signing.", key));
  std::string tampered = detached;
  tampered[tampered.size() - 5] = tampered[tampered.size() - 5] == 'A' ? 'B' : 'A';
  EXPECT_FALSE(VerifyJws(ParseCompactJws(tampered), kRfc8037Payload, key));
}

// The audit's header is fixed text (common practice for a deterministic signature: the
// protected header is what is signed, so it must not depend on a serialiser's choices).
TEST(AuditJws, ProtectedHeaderIsFixedText) {
  const Ed25519PublicKey key = Ed25519PublicKey::FromRaw(Base64UrlDecode(kRfc8037X));
  EXPECT_EQ(AuditJwsProtectedHeader(key), std::string(R"({"alg":"EdDSA","kid":")") + kRfc8037Thumbprint + "\"}");
  EXPECT_EQ(CheckJwsHeader(json::parse(AuditJwsProtectedHeader(key))), "");
}

TEST(AuditJws, HeaderChecksNameWhatIsRefused) {
  EXPECT_NE(CheckJwsHeader(json{{"alg", "ES256"}, {"kid", "k"}}).find("'alg' is \"ES256\""), std::string::npos);
  EXPECT_NE(CheckJwsHeader(json{{"kid", "k"}}).find("no 'alg'"), std::string::npos);
  EXPECT_NE(CheckJwsHeader(json{{"alg", "EdDSA"}, {"kid", "k"}, {"crit", {"b64"}}, {"b64", false}}).find("'crit'"),
            std::string::npos);
  EXPECT_NE(CheckJwsHeader(json{{"alg", "EdDSA"}}).find("no 'kid'"), std::string::npos);
  EXPECT_NE(CheckJwsHeader(json{{"alg", "EdDSA"}, {"kid", 7}}).find("'kid' is 7"), std::string::npos);
}

TEST(AuditJws, MalformedCompactSerialisationsAreNamed) {
  EXPECT_NE(MessageOf([] { ParseCompactJws("abc.def"); }).find("three base64url parts"), std::string::npos);
  EXPECT_NE(MessageOf([] { ParseCompactJws("a.b.c.d"); }).find("three base64url parts"), std::string::npos);
  EXPECT_NE(MessageOf([] { ParseCompactJws("eyJ=..AAAA"); }).find("protected header that is not base64url"),
            std::string::npos);
  EXPECT_NE(MessageOf([] { ParseCompactJws("eyJhbGciOiJFZERTQSJ9..AA+A"); }).find("signature part"),
            std::string::npos);
  EXPECT_NE(MessageOf([] { ParseCompactJws(Base64UrlEncode("[1]") + "..AAAA"); }).find("array, not an object"),
            std::string::npos);
  EXPECT_NE(MessageOf([] { ParseCompactJws(Base64UrlEncode("{\"alg\":") + "..AAAA"); }).find("not JSON"),
            std::string::npos);
  // Two "alg" members would let two readers see two algorithms.
  EXPECT_NE(MessageOf([] { ParseCompactJws(Base64UrlEncode(R"({"alg":"EdDSA","alg":"none"})") + "..AAAA"); })
                .find("not JSON"),
            std::string::npos);
}

TEST(Jwk, ReadsAnEd25519PublicKeyAndIgnoresThePrivateMember) {
  const json jwk = {{"kty", "OKP"}, {"crv", "Ed25519"}, {"x", kRfc8037X}, {"d", kRfc8037D}, {"alg", "EdDSA"},
                    {"use", "sig"}, {"kid", "anything"}};
  EXPECT_EQ(Base64UrlEncode(Ed25519PublicKeyFromJwk(jwk, "").raw()), kRfc8037X);
}

TEST(Jwk, WrongMembersAreNamed) {
  const json good = {{"kty", "OKP"}, {"crv", "Ed25519"}, {"x", kRfc8037X}};
  auto with = [&good](const char* member, const json& value) {
    json jwk = good;
    jwk[member] = value;
    return MessageOf([&jwk] { Ed25519PublicKeyFromJwk(jwk, "key file 'k.jwk': "); });
  };
  EXPECT_EQ(with("kty", "RSA").rfind("key file 'k.jwk': key 'kty' is \"RSA\", expected \"OKP\"", 0), 0u)
      << with("kty", "RSA");
  EXPECT_EQ(with("crv", "X25519").rfind("key file 'k.jwk': key 'crv' is \"X25519\", expected \"Ed25519\"", 0), 0u)
      << with("crv", "X25519");
  EXPECT_NE(with("alg", "ES256").find("key 'alg' is \"ES256\", expected \"EdDSA\""), std::string::npos);
  EXPECT_NE(with("use", "enc").find("key 'use' is \"enc\""), std::string::npos);
  EXPECT_NE(with("x", std::string(kRfc8037X) + "=").find("key 'x' is not base64url"), std::string::npos);
  EXPECT_NE(with("x", "11qYAYKxCrfVS/7TyWQHOg7hcvPapiMlrwIaaPcHURo").find("key 'x' is not base64url"),
            std::string::npos);
  EXPECT_NE(with("x", std::string(kRfc8037X).substr(0, 40)).find("key 'x' decodes to 30 bytes"), std::string::npos);
  EXPECT_NE(with("x", 5).find("key 'x' is a number"), std::string::npos);
  json no_x = good;
  no_x.erase("x");
  EXPECT_NE(MessageOf([&no_x] { Ed25519PublicKeyFromJwk(no_x, ""); }).find("key 'x' is missing"), std::string::npos);
  // In an audit the member names carry their path.
  json bad_crv = good;
  bad_crv["crv"] = "P-256";
  EXPECT_EQ(MessageOf([&bad_crv] { Ed25519PublicKeyFromJwk(bad_crv, "", "signature.jwk."); })
                .rfind("key 'signature.jwk.crv' is \"P-256\"", 0),
            0u);
  EXPECT_NE(MessageOf([] { Ed25519PublicKeyFromJwk(json::array(), "f: "); }).find("expected a JWK"), std::string::npos);
  EXPECT_NE(MessageOf([&good] { Ed25519PublicKeyFromJwk(json{{"keys", {good}}}, "f: "); }).find("a JWK Set"),
            std::string::npos);
}

class PublicKeyFiles : public ::testing::Test {
 protected:
  testing::TempDir folder_;
};

TEST_F(PublicKeyFiles, AJwkAndThePemOfTheSameKeyReadAlike) {
  const auto key = folder_.path() / "key.pem";
  const auto pub = folder_.path() / "key.pub";
  if (testing::RunCommand("openssl genpkey -algorithm ed25519 -out '" + key.string() + "' 2>/dev/null && openssl pkey -in '" +
                          key.string() + "' -pubout -out '" + pub.string() + "'") != 0) {
    GTEST_SKIP() << "the openssl command is not available to make test keys";
  }
  const Ed25519PublicKey from_pem = ReadEd25519PublicKeyFile(pub);
  EXPECT_EQ(ReadEd25519PublicKeyFile(key), from_pem) << "a private key file gives its public half";
  const auto jwk = folder_.Write("key.jwk", "\n  " + Ed25519Jwk(from_pem).dump(2) + "\n");
  EXPECT_EQ(ReadEd25519PublicKeyFile(jwk), from_pem);
  EXPECT_EQ(Ed25519Signer::FromPemFile(key).PublicKey(), from_pem);
}

TEST_F(PublicKeyFiles, UnusableFilesAreNamedWithTheReason) {
  const auto neither = folder_.Write("key.txt", "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a\n");
  EXPECT_EQ(MessageOf([&] { ReadEd25519PublicKeyFile(neither); }),
            "key file '" + neither.string() + "' is neither PEM (-----BEGIN ...) nor a JWK (a JSON object, RFC 7517)");
  const auto broken = folder_.Write("broken.jwk", "{\n  \"kty\": \"OKP\",\n  \"crv\": \n}\n");
  EXPECT_EQ(MessageOf([&] { ReadEd25519PublicKeyFile(broken); }).rfind(broken.string() + ":4:", 0), 0u)
      << MessageOf([&] { ReadEd25519PublicKeyFile(broken); });
  const auto rsa = folder_.Write("rsa.jwk", R"({"kty": "RSA", "n": "AQAB", "e": "AQAB"})");
  EXPECT_EQ(MessageOf([&] { ReadEd25519PublicKeyFile(rsa); }).rfind("key file '" + rsa.string() + "': key 'kty' is \"RSA\"", 0),
            0u);
  // A PEM key of another type says which type it is.
  const auto ec = folder_.path() / "ec.pem";
  const auto x25519 = folder_.path() / "x25519.pem";
  if (testing::RunCommand("openssl genpkey -algorithm EC -pkeyopt ec_paramgen_curve:P-256 -out '" + ec.string() +
                          "' 2>/dev/null && openssl genpkey -algorithm X25519 -out '" + x25519.string() +
                          "' 2>/dev/null") != 0) {
    GTEST_SKIP() << "the openssl command is not available to make test keys";
  }
  EXPECT_EQ(MessageOf([&] { ReadEd25519PublicKeyFile(ec); }),
            "key file '" + ec.string() + "' holds an EC key, not an Ed25519 key (RFC 8032)");
  EXPECT_EQ(MessageOf([&] { ReadEd25519PublicKeyFile(x25519); }),
            "key file '" + x25519.string() + "' holds an X25519 key, not an Ed25519 key (RFC 8032)");
  EXPECT_EQ(MessageOf([&] { Ed25519Signer::FromPemFile(ec); }),
            "key file '" + ec.string() + "' holds an EC key, not an Ed25519 key (RFC 8032)");
}

}  // namespace
}  // namespace stepledger

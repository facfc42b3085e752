#include "stepledger/audit/signature.h"

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

// RFC 8032, section 7.1, TEST 1 (empty message); values recalled from memory and confirmed
// by OpenSSL reproducing the published signature.
constexpr const char* kSecret = "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60";
constexpr const char* kPublic = "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a";
constexpr const char* kSignature =
    "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b";

TEST(Ed25519, Rfc8032TestVectorOne) {
  auto signer = Ed25519Signer::FromRawPrivateKeyHex(kSecret);
  EXPECT_EQ(signer.PublicKeyHex(), kPublic);
  EXPECT_EQ(signer.SignHex(""), kSignature);
  EXPECT_TRUE(VerifyEd25519WithRawKeyHex(kPublic, "", kSignature));
}

TEST(Ed25519, AChangedMessageOrSignatureFails) {
  auto signer = Ed25519Signer::FromRawPrivateKeyHex(kSecret);
  std::string signature = signer.SignHex("seal:abc");
  EXPECT_TRUE(VerifyEd25519WithRawKeyHex(kPublic, "seal:abc", signature));
  EXPECT_FALSE(VerifyEd25519WithRawKeyHex(kPublic, "seal:abd", signature));
  signature[10] = signature[10] == '0' ? '1' : '0';
  EXPECT_FALSE(VerifyEd25519WithRawKeyHex(kPublic, "seal:abc", signature));
  EXPECT_FALSE(VerifyEd25519WithRawKeyHex(kPublic, "seal:abc", "not hex"));
}

// Keys as `openssl genpkey -algorithm ed25519` writes them (the general-purpose OpenSSL tool).
TEST(Ed25519, PemKeysFromOpenSsl) {
  testing::TempDir folder;
  auto key = folder.path() / "key.pem";
  auto pub = folder.path() / "key.pub.pem";
  auto other = folder.path() / "other.pem";
  if (testing::RunCommand("openssl genpkey -algorithm ed25519 -out '" + key.string() +
                          "' 2>/dev/null && openssl pkey -in '" + key.string() + "' -pubout -out '" +
                          pub.string() + "' && openssl genpkey -algorithm ed25519 -out '" +
                          other.string() + "' 2>/dev/null") != 0) {
    GTEST_SKIP() << "the openssl command is not available to make test keys";
  }
  auto signer = Ed25519Signer::FromPemFile(key);
  const std::string signature = signer.Sign("message");
  EXPECT_TRUE(Ed25519PublicKeyFromPemFile(pub).Verifies("message", signature));
  EXPECT_TRUE(Ed25519PublicKeyFromPemFile(key).Verifies("message", signature));  // private file accepted
  EXPECT_FALSE(Ed25519PublicKeyFromPemFile(other).Verifies("message", signature));  // wrong key
  EXPECT_FALSE(Ed25519PublicKeyFromPemFile(pub).Verifies("message", signature.substr(1)));  // not 64 bytes
}

TEST(Ed25519, UnusableKeyFilesNameTheFile) {
  testing::TempDir folder;
  auto junk = folder.Write("junk.pem", "not a key\n");
  try {
    Ed25519Signer::FromPemFile(junk);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("junk.pem"), std::string::npos) << error.what();
  }
  EXPECT_THROW(Ed25519Signer::FromPemFile(folder.path() / "absent.pem"), InputError);
}

}  // namespace
}  // namespace stepledger

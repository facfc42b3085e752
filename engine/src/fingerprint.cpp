#include "stepledger/engine/fingerprint.h"

#include <cassert>
#include <stdexcept>

#include <openssl/evp.h>

#include "stepledger/engine/errors.h"

namespace stepledger {

struct DataFingerprint::Context {
  EVP_MD_CTX* md = nullptr;
};

namespace {

void Check(int ok, const char* what) {
  if (ok != 1) throw NumericalError(std::string("OpenSSL SHA-256 failed in ") + what);
}

}  // namespace

Sha256Digest Sha256(std::string_view bytes) {
  Sha256Digest digest{};
  unsigned int length = 0;
  Check(EVP_Digest(bytes.data(), bytes.size(), digest.data(), &length, EVP_sha256(), nullptr),
        "EVP_Digest");
  assert(length == digest.size());
  return digest;
}

std::string ToHex(const Sha256Digest& digest) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string text;
  text.reserve(digest.size() * 2);
  for (unsigned char byte : digest) {
    text.push_back(kHex[byte >> 4]);
    text.push_back(kHex[byte & 0x0f]);
  }
  return text;
}

Sha256Stream::Sha256Stream() {
  EVP_MD_CTX* md = EVP_MD_CTX_new();
  if (md == nullptr) throw NumericalError("OpenSSL could not allocate a digest context");
  context_ = md;
  Check(EVP_DigestInit_ex(md, EVP_sha256(), nullptr), "EVP_DigestInit_ex");
}

Sha256Stream::~Sha256Stream() { EVP_MD_CTX_free(static_cast<EVP_MD_CTX*>(context_)); }

void Sha256Stream::Update(std::string_view bytes) {
  Check(EVP_DigestUpdate(static_cast<EVP_MD_CTX*>(context_), bytes.data(), bytes.size()), "EVP_DigestUpdate");
}

Sha256Digest Sha256Stream::Finish() {
  Sha256Digest digest{};
  unsigned int length = 0;
  Check(EVP_DigestFinal_ex(static_cast<EVP_MD_CTX*>(context_), digest.data(), &length), "EVP_DigestFinal_ex");
  return digest;
}

DataFingerprint::DataFingerprint() : context_(new Context) {
  context_->md = EVP_MD_CTX_new();
  if (context_->md == nullptr) throw NumericalError("OpenSSL could not allocate a digest context");
  Check(EVP_DigestInit_ex(context_->md, EVP_sha256(), nullptr), "EVP_DigestInit_ex");
}

DataFingerprint::~DataFingerprint() {
  EVP_MD_CTX_free(context_->md);
  delete context_;
}

void DataFingerprint::CloseBlock() {
  Sha256Digest digest{};
  unsigned int length = 0;
  Check(EVP_DigestFinal_ex(context_->md, digest.data(), &length), "EVP_DigestFinal_ex");
  blocks_.push_back(digest);
  Check(EVP_DigestInit_ex(context_->md, EVP_sha256(), nullptr), "EVP_DigestInit_ex");
  in_block_ = 0;
}

void DataFingerprint::Update(std::string_view bytes) {
  assert(!finished_ && "DataFingerprint::Update after Finish");
  while (!bytes.empty()) {
    std::size_t take = std::min(bytes.size(), kBlockBytes - in_block_);
    Check(EVP_DigestUpdate(context_->md, bytes.data(), take), "EVP_DigestUpdate");
    in_block_ += take;
    total_ += take;
    bytes.remove_prefix(take);
    if (in_block_ == kBlockBytes) CloseBlock();
  }
}

std::string DataFingerprint::Finish() {
  assert(!finished_);
  if (in_block_ > 0) CloseBlock();
  finished_ = true;
  return Combine(blocks_, total_);
}

std::string DataFingerprint::Combine(const std::vector<Sha256Digest>& blocks,
                                     std::uint64_t total_bytes) {
  std::string material;
  material.reserve(blocks.size() * 32 + 8);
  for (const auto& block : blocks) material.append(reinterpret_cast<const char*>(block.data()), 32);
  for (int byte = 0; byte < 8; ++byte) {
    material.push_back(static_cast<char>((total_bytes >> (8 * byte)) & 0xff));
  }
  return ToHex(Sha256(material));
}

}  // namespace stepledger

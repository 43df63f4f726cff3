#include "common/sha256.h"

#include <openssl/evp.h>

#include <cstdio>
#include <cstdlib>

namespace chorus {
namespace {

void CheckOpenSsl(int ok, const char* what) {
  if (ok == 1) return;
  std::fprintf(stderr, "chorus: OpenSSL %s failed (out of memory?)\n", what);
  std::abort();
}

}  // namespace

Sha256::Sha256() : ctx_(EVP_MD_CTX_new(), EVP_MD_CTX_free) {
  CheckOpenSsl(ctx_ != nullptr, "EVP_MD_CTX_new");
  CheckOpenSsl(EVP_DigestInit_ex(ctx_.get(), EVP_sha256(), nullptr), "EVP_DigestInit_ex");
}

void Sha256::Update(const void* data, size_t n) {
  CheckOpenSsl(EVP_DigestUpdate(ctx_.get(), data, n), "EVP_DigestUpdate");
}

std::string Sha256::FinishHex() {
  unsigned char digest[EVP_MAX_MD_SIZE];
  unsigned int length = 0;
  CheckOpenSsl(EVP_DigestFinal_ex(ctx_.get(), digest, &length), "EVP_DigestFinal_ex");
  static const char kHex[] = "0123456789abcdef";
  std::string hex;
  hex.reserve(2 * length);
  for (unsigned int i = 0; i < length; ++i) {
    hex += kHex[digest[i] >> 4];
    hex += kHex[digest[i] & 0xF];
  }
  return hex;
}

std::string Sha256Hex(const void* data, size_t n) {
  Sha256 sha;
  sha.Update(data, n);
  return sha.FinishHex();
}

}  // namespace chorus

// SHA-256 (FIPS 180-4) digests as lowercase hex, on OpenSSL's EVP interface.
// Thread safety: Sha256Hex is reentrant; a Sha256 object is a value, use one per thread.
#pragma once

#include <cstddef>
#include <memory>
#include <string>

struct evp_md_ctx_st;  // OpenSSL's EVP_MD_CTX; kept out of this header

namespace chorus {

// Returns the 64-character lowercase hex SHA-256 of the n bytes at `data`.
std::string Sha256Hex(const void* data, size_t n);

// An incremental SHA-256: Update any number of times, then FinishHex once. Feeding the same bytes
// in any chunking gives the same digest as Sha256Hex over their concatenation.
// OpenSSL fails only when it cannot allocate; that aborts the process.
class Sha256 {
 public:
  Sha256();
  Sha256(Sha256&&) noexcept = default;
  Sha256& operator=(Sha256&&) noexcept = default;

  // Appends n bytes at `data` to the message. Requires: FinishHex not yet called.
  void Update(const void* data, size_t n);

  // Returns the digest of everything passed to Update. Call once; the object is spent after it.
  std::string FinishHex();

 private:
  std::unique_ptr<evp_md_ctx_st, void (*)(evp_md_ctx_st*)> ctx_;
};

}  // namespace chorus

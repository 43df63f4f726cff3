#include "common/rng.h"

#include <cmath>

namespace chorus {
namespace {

uint64_t SplitMix64(uint64_t x) {
  x += 0x9E3779B97F4A7C15ull;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ull;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBull;
  return x ^ (x >> 31);
}

// Philox4x32 round constants (Salmon et al. 2011, table 2).
constexpr uint32_t kMul0 = 0xD2511F53u;
constexpr uint32_t kMul1 = 0xCD9E8D57u;
constexpr uint32_t kWeyl0 = 0x9E3779B9u;
constexpr uint32_t kWeyl1 = 0xBB67AE85u;

}  // namespace

uint64_t Derive(uint64_t parent, uint64_t index) {
  return SplitMix64(SplitMix64(parent) ^ (index * 0xD6E8FEB86659FD93ull + 0x632BE59BD9B4E019ull));
}

uint64_t Derive(uint64_t parent, std::string_view purpose) {
  uint64_t h = 0xCBF29CE484222325ull;  // FNV-1a over the label
  for (unsigned char c : purpose) h = (h ^ c) * 0x100000001B3ull;
  return Derive(parent, h);
}

std::array<uint32_t, 4> Philox4x32x10(std::array<uint32_t, 4> counter, std::array<uint32_t, 2> key) {
  // ten rounds of (x0,x1,x2,x3) <- (hi(M1*x2)^x1^k0, lo(M1*x2), hi(M0*x0)^x3^k1, lo(M0*x0)),
  // with the key bumped by the Weyl constants between rounds.
  uint32_t x0 = counter[0], x1 = counter[1], x2 = counter[2], x3 = counter[3];
  uint32_t k0 = key[0], k1 = key[1];
  for (int round = 0; round < 10; ++round) {
    const uint64_t p0 = static_cast<uint64_t>(kMul0) * x0;
    const uint64_t p1 = static_cast<uint64_t>(kMul1) * x2;
    const uint32_t y0 = static_cast<uint32_t>(p1 >> 32) ^ x1 ^ k0;
    const uint32_t y1 = static_cast<uint32_t>(p1);
    const uint32_t y2 = static_cast<uint32_t>(p0 >> 32) ^ x3 ^ k1;
    const uint32_t y3 = static_cast<uint32_t>(p0);
    x0 = y0; x1 = y1; x2 = y2; x3 = y3;
    k0 += kWeyl0;
    k1 += kWeyl1;
  }
  return {x0, x1, x2, x3};
}

std::array<uint32_t, 4> Philox::Block(uint64_t counter) const {
  return Philox4x32x10({static_cast<uint32_t>(counter), static_cast<uint32_t>(counter >> 32), 0, 0},
                       {static_cast<uint32_t>(key_), static_cast<uint32_t>(key_ >> 32)});
}

uint32_t Philox::NextU32() {
  if (used_ == 4) {
    buffer_ = Block(counter_++);
    used_ = 0;
  }
  return buffer_[used_++];
}

uint64_t Philox::NextU64() {
  const uint64_t hi = NextU32();
  return (hi << 32) | NextU32();
}

double Philox::NextUniform() { return static_cast<double>(NextU64() >> 11) * 0x1.0p-53; }

float Philox::NextUniformFloat() { return static_cast<float>(NextU32() >> 8) * 0x1.0p-24f; }

double Philox::NextNormal() {
  // Box-Muller: sqrt(-2 ln u1) cos(2 pi u2), u1 in (0, 1].
  const double u1 = 1.0 - NextUniform();
  const double u2 = NextUniform();
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(6.283185307179586 * u2);
}

uint64_t Philox::NextBelow(uint64_t n) {
  const uint64_t limit = UINT64_MAX - UINT64_MAX % n;
  uint64_t r;
  do {
    r = NextU64();
  } while (r >= limit);
  return r % n;
}

}  // namespace chorus

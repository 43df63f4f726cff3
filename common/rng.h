// Counter-based random numbers: Philox4x32-10 (Salmon et al., "Parallel random numbers: as easy
// as 1, 2, 3", SC 2011). A stream is a 64-bit key; the n-th block of a stream is a pure function
// of (key, n), so results never depend on thread scheduling or on how many draws other streams
// made. Thread safety: a Philox object is a value; use one per thread.
#pragma once

#include <array>
#include <cstdint>
#include <string_view>

namespace chorus {

// Mixes a parent seed with a child index into a new, well-separated 64-bit seed (SplitMix64
// finaliser applied to the pair). Derive(run_seed, i) is member i's seed.
uint64_t Derive(uint64_t parent, uint64_t index);

// Derive with a purpose label instead of an index, e.g. Derive(seed, "init").
uint64_t Derive(uint64_t parent, std::string_view purpose);

// The raw Philox4x32-10 bijection: block = f(counter, key). Exposed for known-answer tests.
std::array<uint32_t, 4> Philox4x32x10(std::array<uint32_t, 4> counter, std::array<uint32_t, 2> key);

class Philox {
 public:
  explicit Philox(uint64_t key) : key_(key) {}

  // The 4 x 32-bit block number `counter` of this stream.
  std::array<uint32_t, 4> Block(uint64_t counter) const;

  // Sequential draws: consume blocks 0, 1, 2, ... of the stream.
  uint32_t NextU32();
  uint64_t NextU64();
  double NextUniform();          // in [0, 1), 53 random bits
  float NextUniformFloat();      // in [0, 1), 24 random bits
  double NextNormal();           // standard normal, Box-Muller on two uniforms
  uint64_t NextBelow(uint64_t n);  // uniform integer in [0, n), n >= 1, unbiased (rejection)

 private:
  uint64_t key_;
  uint64_t counter_ = 0;
  std::array<uint32_t, 4> buffer_{};
  int used_ = 4;  // words of buffer_ already consumed
};

}  // namespace chorus

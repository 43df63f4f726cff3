#include "common/rng.h"

#include <gtest/gtest.h>

#include <cmath>

namespace chorus {
namespace rng_test {

// Known-answer vectors for Philox4x32-10 from Random123's kat_vectors file (Salmon et al., SC
// 2011), as remembered: counter = key = 0, and the "pi digits" vector.
TEST(RngTest, Philox4x32x10MatchesPublishedKnownAnswers) {
  EXPECT_EQ(Philox4x32x10({0, 0, 0, 0}, {0, 0}),
            (std::array<uint32_t, 4>{0x6627e8d5u, 0xe169c58du, 0xbc57ac4cu, 0x9b00dbd8u}));
  EXPECT_EQ(Philox4x32x10({0x243f6a88u, 0x85a308d3u, 0x13198a2eu, 0x03707344u},
                          {0xa4093822u, 0x299f31d0u}),
            (std::array<uint32_t, 4>{0xd16cfe09u, 0x94fdccebu, 0x5001e420u, 0x24126ea1u}));
}

TEST(RngTest, StreamIsAFunctionOfKeyAndPositionOnly) {
  Philox a(Derive(7, 3)), b(Derive(7, 3)), c(Derive(7, 4));
  for (int i = 0; i < 100; ++i) {
    const uint32_t va = a.NextU32();
    EXPECT_EQ(va, b.NextU32());
    if (i == 0) {
      EXPECT_NE(va, c.NextU32());
    }
  }
}

TEST(RngTest, NormalDrawsHaveUnitMomentsWithinSamplingError) {
  Philox r(Derive(1, "normal"));
  const int n = 200000;
  double s = 0, s2 = 0;
  for (int i = 0; i < n; ++i) {
    const double z = r.NextNormal();
    s += z;
    s2 += z * z;
  }
  const double mean = s / n, var = s2 / n - mean * mean;
  // 5 standard errors: se(mean) = 1/sqrt(n), se(var) = sqrt(2/n) for a standard normal.
  EXPECT_NEAR(mean, 0.0, 5.0 / std::sqrt(n));
  EXPECT_NEAR(var, 1.0, 5.0 * std::sqrt(2.0 / n));
}

TEST(RngTest, NextBelowStaysInRange) {
  Philox r(11);
  for (int i = 0; i < 10000; ++i) EXPECT_LT(r.NextBelow(7), 7u);
}

}  // namespace rng_test
}  // namespace chorus

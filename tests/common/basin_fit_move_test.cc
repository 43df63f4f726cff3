// FitBasin from moved moments (no copies) gives the same fit, bit for bit, as FitBasin from a
// const reference, whether the ring of deviations is part full, exactly full or has wrapped.
#include <gtest/gtest.h>

#include "common/basin_fit.h"
#include "common/rng.h"

namespace chorus {
namespace basin_fit_move_test {

SnapshotMoments Moments(int64_t dim, int rank, int snapshots, uint64_t seed) {
  SnapshotMoments m(dim, rank);
  Philox rng(seed);
  std::vector<float> w(static_cast<size_t>(dim));
  for (int s = 0; s < snapshots; ++s) {
    for (float& x : w) x = static_cast<float>(rng.NextNormal());
    m.Add(w.data());
  }
  return m;
}

TEST(BasinFitMoveTest, MovedMomentsGiveTheCopiedFitBitForBit) {
  const int rank = 5;
  for (int snapshots : {1, 2, 4, 5, 6, 12, 13}) {
    for (BasinMethod method : {BasinMethod::kNone, BasinMethod::kGaussianDiag, BasinMethod::kGaussianLowRank}) {
      if (method == BasinMethod::kGaussianLowRank && snapshots < 2) continue;
      SCOPED_TRACE(std::to_string(snapshots) + " snapshots, " + BasinMethodName(method));
      SnapshotMoments moments = Moments(37, method == BasinMethod::kGaussianLowRank ? rank : 0,
                                        snapshots, 40 + static_cast<uint64_t>(snapshots));
      const BasinFit copied = FitBasin(moments, method);
      const BasinFit moved = FitBasin(std::move(moments), method);
      EXPECT_EQ(moved.method, copied.method);
      EXPECT_EQ(moved.mean, copied.mean);
      EXPECT_EQ(moved.variance, copied.variance);
      ASSERT_EQ(moved.deviations.rows(), copied.deviations.rows());
      ASSERT_EQ(moved.deviations.cols(), copied.deviations.cols());
      EXPECT_TRUE(moved.deviations == copied.deviations);
      EXPECT_EQ(moments.count(), 0);
      EXPECT_EQ(moments.dim(), 0);
    }
  }
}

}  // namespace basin_fit_move_test
}  // namespace chorus

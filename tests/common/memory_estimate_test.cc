// common/memory_estimate.h: the estimate's terms for a small network worked out by hand from the
// formula in the header, the search grid's widest network counted, and basin fits adding their
// vectors.
#include "common/memory_estimate.h"

#include <gtest/gtest.h>

#include "tests/testing/small_data.h"

namespace chorus {
namespace memory_estimate_test {

TEST(MemoryEstimateTest, TermsOfASmallNetworkAsWorkedOutByHand) {
  const PreparedData data = testing::SmallClassificationData(1);  // 4 features, 3 classes
  Config c;
  c.model.hidden = {8};
  c.train.parts = 1;
  c.train.batch_size = 16;
  c.ensemble.members = 5;
  const MemoryEstimate e = EstimateRunMemory(c, data, 2);
  // P = (4 + 1) x 8 + (8 + 1) x 3 = 67; layer widths 4 + 8 + 3 = 15.
  EXPECT_EQ(e.parameters, 67);
  // Per member: 67 x (6 + 1) + 16 x 15 x 4 = 1429 floats; two at once, 4 bytes each.
  EXPECT_EQ(e.training_bytes, 2 * 1429 * 4);
  // Per result: 67 + 1 sample x (40 validation + 30 test rows) x 3 outputs = 277 floats.
  EXPECT_EQ(e.results_bytes, 5 * 277 * 4);
  // (150 + 40 + 30) rows x 4 features, twice.
  EXPECT_EQ(e.data_bytes, 2 * 220 * 4 * 4);
  EXPECT_EQ(e.Total(), e.training_bytes + e.results_bytes + e.data_bytes);
  EXPECT_EQ(EstimateRunMemory(c, data, 0).training_bytes, 0) << "all on remote workers";
}

TEST(MemoryEstimateTest, TheSearchGridsWidestNetworkAndBasinFitsCount) {
  const PreparedData data = testing::SmallClassificationData(1);
  Config c;
  c.model.hidden = {8};
  c.search.hidden = {{8}, {32, 32}};
  // P = 5 x 32 + 33 x 32 + 33 x 3 = 1315.
  EXPECT_EQ(EstimateRunMemory(c, data, 1).parameters, 1315);
  c.search.hidden.clear();
  const MemoryEstimate point = EstimateRunMemory(c, data, 1);
  c.ensemble.basin.method = BasinMethod::kGaussianLowRank;
  c.ensemble.basin.rank = 10;
  c.ensemble.basin.samples = 4;
  const MemoryEstimate lowrank = EstimateRunMemory(c, data, 1);
  // 2 x (10 + 2) = 24 more vectors of 67 floats while training.
  EXPECT_EQ(lowrank.training_bytes - point.training_bytes, 24 * 67 * 4);
  // Per result: 12 more parameter vectors and 3 more samples of 70 rows x 3 outputs.
  EXPECT_EQ(lowrank.results_bytes - point.results_bytes, c.ensemble.members * (12 * 67 + 3 * 70 * 3) * 4);
}

TEST(MemoryEstimateTest, ByteTextUsesBinaryUnits) {
  EXPECT_EQ(ByteText(512), "512 B");
  EXPECT_EQ(ByteText(1536), "1.5 KiB");
  EXPECT_EQ(ByteText(int64_t{3} << 30), "3.0 GiB");
}

}  // namespace memory_estimate_test
}  // namespace chorus

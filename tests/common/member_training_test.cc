// What TrainMember (common/member_training.h) does with settings at the edge of the data.
#include "common/member_training.h"

#include <gtest/gtest.h>

#include "common/rng.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace {

MemberSpec SpecWithBatch(int batch_size) { return testing::SmallMemberSpec(0, 13, 3, batch_size); }

// A deliberate choice: a batch larger than the training rows is not an error; it is clamped to
// the row count (one full-batch step per epoch), so it trains exactly like batch_size = rows.
TEST(MemberTrainingTest, BatchLargerThanTheTrainingRowsIsClampedToTheRowCount) {
  const PreparedData d = testing::SmallClassificationData(8);
  ASSERT_EQ(d.train.rows(), 150);
  const StatusOr<MemberResult> huge = TrainMember(SpecWithBatch(100000), d, nullptr);
  ASSERT_TRUE(huge.ok()) << huge.status().ToString();
  const StatusOr<MemberResult> rows = TrainMember(SpecWithBatch(150), d, nullptr);
  ASSERT_TRUE(rows.ok()) << rows.status().ToString();
  EXPECT_EQ(huge.value().epoch_loss.size(), 3u);
  EXPECT_EQ(huge.value().parameters, rows.value().parameters);
  EXPECT_EQ(huge.value().epoch_loss, rows.value().epoch_loss);
  EXPECT_TRUE(huge.value().test_outputs == rows.value().test_outputs);
  // The comparison can tell batch sizes apart: a smaller batch takes other steps.
  const StatusOr<MemberResult> smaller = TrainMember(SpecWithBatch(149), d, nullptr);
  ASSERT_TRUE(smaller.ok()) << smaller.status().ToString();
  EXPECT_NE(smaller.value().parameters, rows.value().parameters);
}

}  // namespace
}  // namespace chorus

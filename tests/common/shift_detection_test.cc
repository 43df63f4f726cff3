#include "common/shift_detection.h"

#include <gtest/gtest.h>

#include <cmath>

namespace chorus {
namespace shift_detection_test {

// Hand-worked: confident test rows, unsure shifted rows. Every shifted row is more uncertain than
// every test row, so each AUROC is 1 (Mann-Whitney U = n_pos n_neg); swapping the sets gives 0.
TEST(ShiftDetectionTest, UnsureShiftedRowsScoreOneAndSwappedSetsZero) {
  const Matrix sure{{6.0f, 0.0f, 0.0f}, {0.0f, 5.0f, 0.0f}};
  const Matrix unsure{{0.0f, 0.0f, 0.0f}, {0.2f, 0.0f, 0.1f}, {1.0f, 0.9f, 0.0f}};
  const ShiftAurocs a = ClassificationShiftAurocs({&sure}, {&unsure}, {1.0}, 1.0);
  EXPECT_EQ(a.entropy, 1.0);
  EXPECT_EQ(a.max_probability, 1.0);
  EXPECT_TRUE(std::isnan(a.mutual_information));  // one network
  EXPECT_GT(a.mean_score_shifted, a.mean_score_test);
  const ShiftAurocs swapped = ClassificationShiftAurocs({&unsure}, {&sure}, {1.0}, 1.0);
  EXPECT_EQ(swapped.entropy, 0.0);
  EXPECT_EQ(swapped.max_probability, 0.0);
}

// Two networks that agree on the test rows and disagree on the shifted rows: mutual information
// (their disagreement) ranks every shifted row above every test row.
TEST(ShiftDetectionTest, DisagreementOnShiftedRowsIsMutualInformation) {
  const Matrix test{{4.0f, 0.0f}, {0.0f, 4.0f}};
  const Matrix left{{4.0f, 0.0f}, {4.0f, 0.0f}}, right{{0.0f, 4.0f}, {0.0f, 4.0f}};
  const ShiftAurocs a = ClassificationShiftAurocs({&test, &test}, {&left, &right}, {0.5, 0.5}, 1.0);
  EXPECT_EQ(a.mutual_information, 1.0);
  EXPECT_EQ(a.entropy, 1.0);  // the mixture of the two is (1/2, 1/2)
}

TEST(ShiftDetectionTest, RegressionRanksByStandardDeviation) {
  const MemberGaussian test_a{{0.0, 1.0}, {1.0, 1.0}}, test_b{{0.1, 1.1}, {1.0, 1.0}};
  const MemberGaussian shifted_a{{5.0, -5.0}, {1.0, 2.0}}, shifted_b{{-5.0, 5.0}, {1.0, 2.0}};
  const ShiftAurocs a = RegressionShiftAurocs({&test_a, &test_b}, {&shifted_a, &shifted_b}, {0.5, 0.5}, 1.0);
  EXPECT_EQ(a.total_std, 1.0);
  EXPECT_EQ(a.epistemic_std, 1.0);
  EXPECT_TRUE(std::isnan(a.entropy));
  // Test rows: total variance 1 + 0.05^2 -> std about 1.00125; shifted: 1 + 25 and 4 + 25.
  EXPECT_NEAR(a.mean_score_test, std::sqrt(1.0025), 1e-12);
  EXPECT_NEAR(a.mean_score_shifted, (std::sqrt(26.0) + std::sqrt(29.0)) / 2.0, 1e-12);
}

}  // namespace shift_detection_test
}  // namespace chorus

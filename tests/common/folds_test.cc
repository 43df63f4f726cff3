// k-fold cross-fitting (common/folds.h) and what a fold job trains on (common/member_training.h).
#include "common/folds.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <map>

#include "common/heads.h"
#include "common/rng.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace folds_test {

using testing::SmallClassificationData;

TEST(FoldsTest, ResolvedFoldsFollowTheConfigAndTheDataSize) {
  DataConfig c;  // folds: auto, small below 20000 rows
  EXPECT_EQ(ResolvedFolds(c, 1000), kAutoFolds);
  EXPECT_EQ(ResolvedFolds(c, 3), 3) << "at most one fold per row";
  EXPECT_EQ(ResolvedFolds(c, 1), 0);
  EXPECT_EQ(ResolvedFolds(c, 20000), 0) << "not small: the holdout";
  c.folds = 7;
  EXPECT_EQ(ResolvedFolds(c, 50000), 7);
  c.folds = -1;
  c.validation_file = "v.csv";
  EXPECT_EQ(ResolvedFolds(c, 1000), 0) << "a validation file is a holdout";
}

TEST(FoldsTest, AssignmentIsSeededCoversEveryRowAndIsStratifiedByLabel) {
  const PreparedData d = SmallClassificationData(3);
  const std::vector<int> a = AssignFolds(d.train, 5, 11), again = AssignFolds(d.train, 5, 11);
  EXPECT_EQ(a, again);
  EXPECT_NE(a, AssignFolds(d.train, 5, 12));
  std::map<int, int> fold_sizes;
  std::map<std::pair<int, int>, int> per_class;  // (fold, label) -> rows
  std::map<int, int> class_sizes;
  for (size_t i = 0; i < a.size(); ++i) {
    ASSERT_GE(a[i], 0);
    ASSERT_LT(a[i], 5);
    ++fold_sizes[a[i]];
    ++per_class[{a[i], d.train.labels[i]}];
    ++class_sizes[d.train.labels[i]];
  }
  for (const auto& [fold, n] : fold_sizes) EXPECT_EQ(n, 30) << "fold " << fold;
  // Dealt out round-robin in label order: each fold holds floor or ceil of a fifth of each class.
  for (const auto& [key, n] : per_class) {
    const int total = class_sizes[key.second];
    EXPECT_GE(n, total / 5) << "fold " << key.first << ", class " << key.second;
    EXPECT_LE(n, (total + 4) / 5) << "fold " << key.first << ", class " << key.second;
  }
}

TEST(FoldsTest, RowsOfAFoldPartitionTheSplitAndScatterPutsThemBack) {
  const PreparedData d = SmallClassificationData(4);
  const std::vector<int> fold_of = AssignFolds(d.train, 3, 5);
  std::vector<Matrix> held_out;
  for (int k = 0; k < 3; ++k) {
    const FoldRows rows = RowsOfFold(fold_of, k);
    EXPECT_EQ(rows.train.size() + rows.held_out.size(), fold_of.size());
    EXPECT_TRUE(std::is_sorted(rows.held_out.begin(), rows.held_out.end()));
    for (int64_t r : rows.held_out) EXPECT_EQ(fold_of[r], k);
    for (int64_t r : rows.train) EXPECT_NE(fold_of[r], k);
    held_out.push_back(SelectRows(d.train, rows.held_out).x);
  }
  const Matrix back = ScatterByFold<Matrix>(fold_of, {&held_out[0], &held_out[1], &held_out[2]});
  EXPECT_TRUE(back == d.train.x);
}

MemberSpec Spec(int fold) {
  MemberSpec spec = testing::SmallMemberSpec(2, 9, 6, 16);
  spec.role = fold >= 0 ? JobRole::kFold : JobRole::kMember;
  spec.fold = fold;
  spec.folds = fold >= 0 ? 3 : 0;
  spec.fold_seed = 5;
  return spec;
}

// A fold job never sees its held-out rows' features: changing them changes its validation
// outputs only, never its parameters; and its validation outputs are the held-out rows in order.
TEST(FoldsTest, AFoldJobTrainsOnlyOutsideItsFoldAndPredictsTheFold) {
  const PreparedData d = SmallClassificationData(5);
  const StatusOr<MemberResult> a = TrainMember(Spec(1), d, nullptr);
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  const FoldRows rows = RowsOfFold(AssignFolds(d.train, 3, 5), 1);
  ASSERT_EQ(a.value().validation_outputs.rows(), static_cast<int64_t>(rows.held_out.size()));
  PreparedData changed = d;
  for (int64_t r : rows.held_out) changed.train.x.row(r) *= 3.0f;
  const StatusOr<MemberResult> b = TrainMember(Spec(1), changed, nullptr);
  ASSERT_TRUE(b.ok());
  EXPECT_EQ(a.value().parameters, b.value().parameters);
  EXPECT_FALSE(a.value().validation_outputs == b.value().validation_outputs);
  const Split held = SelectRows(d.train, rows.held_out);
  EXPECT_NEAR(SoftmaxCrossEntropyValue(a.value().validation_outputs, held.labels.data()),
              a.value().validation_nll.back(), 1e-9);
  EXPECT_EQ(a.value().fold, 1);
  EXPECT_EQ(a.value().role, JobRole::kFold);
}

// Early stopping keeps the best epoch's parameters: the same member stopped at that epoch by
// stop_epoch (same schedule, same shuffles) has bit-identical parameters, and the kept
// validation NLL is the lowest of the curve.
TEST(EarlyStoppingTest, KeptParametersAreThoseOfTheBestEpoch) {
  const PreparedData d = SmallClassificationData(6);
  MemberSpec spec = Spec(-1);
  spec.train.epochs = 40;
  spec.train.optimizer.lr = 0.3;  // fast enough to overfit 150 rows within 40 epochs
  spec.model.hidden = {32};
  spec.train.early_stopping = {Switch::kOn, 4};
  const StatusOr<MemberResult> early = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(early.ok()) << early.status().ToString();
  const MemberResult& e = early.value();
  const int best = e.best_epoch;
  ASSERT_GE(best, 1);
  ASSERT_LT(best + 4, 40) << "the setting must overfit, or this test checks nothing";
  const auto min_it = std::min_element(e.validation_nll.begin(), e.validation_nll.end());
  EXPECT_EQ(best, static_cast<int>(min_it - e.validation_nll.begin()) + 1);
  EXPECT_EQ(static_cast<int>(e.epoch_loss.size()), std::min(40, best + 4)) << "stops after the patience";
  EXPECT_NEAR(SoftmaxCrossEntropyValue(e.validation_outputs, d.validation.labels.data()), *min_it, 1e-9);
  MemberSpec stopped = spec;
  stopped.train.early_stopping.mode = Switch::kOff;
  stopped.stop_epoch = best;
  const StatusOr<MemberResult> s = TrainMember(stopped, d, nullptr);
  ASSERT_TRUE(s.ok());
  EXPECT_EQ(s.value().parameters, e.parameters);
  EXPECT_EQ(s.value().best_epoch, best);
}

TEST(EarlyStoppingTest, OffTrainsEveryEpochAndStillRecordsTheCurve) {
  const PreparedData d = SmallClassificationData(7);
  const StatusOr<MemberResult> r = TrainMember(Spec(-1), d, nullptr);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r.value().epoch_loss.size(), 6u);
  EXPECT_EQ(r.value().validation_nll.size(), 6u);
  EXPECT_EQ(r.value().best_epoch, 6);
}

}  // namespace folds_test
}  // namespace chorus

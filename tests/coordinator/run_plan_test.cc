#include "coordinator/run_plan.h"

#include <gtest/gtest.h>

#include <cmath>

namespace chorus {
namespace run_plan_test {

PreparedData Rows(int64_t train, int64_t validation, int folds) {
  PreparedData d;
  d.train.x.resize(train, 2);
  d.validation.x.resize(validation, 2);
  d.folds = folds;
  return d;
}

Config SearchConfigFor() {
  Config c;
  c.ensemble.members = 3;
  c.search.hidden = {{8}, {16, 16}};
  c.search.weight_decay = {0.0, 0.1, 1.0};
  return c;
}

TEST(RunPlanTest, GridIsTheProductInAFixedOrderAndAlwaysHoldsTheConfiguredValues) {
  Config c = SearchConfigFor();  // hidden {{8}, {16, 16}}, weight decay {0, 0.1, 1}
  c.model.hidden = {8};
  c.train.optimizer.weight_decay = 0.5;
  c.train.optimizer.lr = 0.02;
  const std::vector<GridPoint> grid = SearchGrid(c);
  ASSERT_EQ(grid.size(), 8u) << "2 widths x (the configured 0.5 and 3 listed decays)";
  EXPECT_EQ(grid[0].hidden, std::vector<int>{8});
  EXPECT_DOUBLE_EQ(grid[0].weight_decay, 0.5) << "the configured value comes first";
  EXPECT_DOUBLE_EQ(grid[1].weight_decay, 0.0) << "weight decay varies faster than width";
  EXPECT_EQ(grid[4].hidden, (std::vector<int>{16, 16}));
  for (const GridPoint& p : grid) EXPECT_DOUBLE_EQ(p.lr, 0.02);
  EXPECT_TRUE(SearchGrid(Config{}).empty());
  const Config applied = WithPoint(c, grid[6]);
  EXPECT_EQ(applied.model.hidden, (std::vector<int>{16, 16}));
  EXPECT_DOUBLE_EQ(applied.train.optimizer.weight_decay, 0.1);
}

TEST(RunPlanTest, SearchJobsUseMemberZerosSeedOnEveryFoldWithoutBasinFits) {
  Config c = SearchConfigFor();
  c.ensemble.basin.method = BasinMethod::kGaussianDiag;
  const std::vector<MemberSpec> specs = SearchSpecs(c, Rows(100, 0, 4));
  ASSERT_EQ(specs.size(), 12u * 4u) << "3 widths (the configured one too) x 4 decays x 4 folds";
  EXPECT_EQ(JobName(specs[5]), "search-1-1");
  for (const MemberSpec& s : specs) {
    EXPECT_EQ(s.seed, specs[0].seed);
    EXPECT_EQ(s.role, JobRole::kSearch);
    EXPECT_EQ(s.basin.method, BasinMethod::kNone);
    EXPECT_EQ(s.folds, 4);
  }
  const std::vector<MemberSpec> holdout = SearchSpecs(c, Rows(100, 20, 0));
  ASSERT_EQ(holdout.size(), 12u);
  EXPECT_EQ(holdout[2].fold, -1);
  EXPECT_EQ(JobName(holdout[2]), "search-2");
}

// A job that held out `rows` rows with this validation NLL after each epoch.
MemberResult Curve(int rows, std::vector<double> nll) {
  MemberResult r;
  r.validation_outputs.resize(rows, 2);
  r.validation_nll = std::move(nll);
  r.best_epoch = static_cast<int>(nll.size());
  return r;
}

// Jobs of 30 and 10 rows: epoch 2 averages (30 * 1.0 + 10 * 3.0) / 40 = 1.5, epoch 3
// (30 * 1.2 + 10 * 1.0) / 40 = 1.15, the joint best, although the first job alone was best at
// epoch 2. The longer curve is cut to the shorter one's epochs.
TEST(RunPlanTest, JointBestEpochWeighsEveryHeldOutRowAlike) {
  const MemberResult a = Curve(30, {2.0, 1.0, 1.2}), b = Curve(10, {2.0, 3.0, 1.0, 0.1});
  const JointEpoch joint = BestJointEpoch({&a, &b});
  EXPECT_EQ(joint.epoch, 3);
  EXPECT_DOUBLE_EQ(joint.validation_nll, 1.15);
}

// Three points of two folds each; point 2 has a failed job and cannot be scored.
TEST(RunPlanTest, SearchScoresEachPointByItsJointBestEpoch) {
  Config c;
  c.train.optimizer.weight_decay = 0.0;  // in the list: three points
  c.search.weight_decay = {0.0, 0.1, 1.0};
  const MemberResult a = Curve(30, {2.0, 1.0, 1.2}), b = Curve(10, {2.0, 3.0, 1.0}),
                     d = Curve(20, {1.5, 1.2, 1.3}), e = Curve(20, {1.4, 1.2, 1.25});
  StatusOr<SearchOutcome> s = ScoreSearch(c, {&a, &b, &d, &e, &a, nullptr}, {"", "", "", "", "", "diverged"});
  ASSERT_TRUE(s.ok()) << s.status().ToString();
  EXPECT_DOUBLE_EQ(s.value().points[0].validation_nll, 1.15);
  EXPECT_EQ(s.value().points[0].best_epoch, 3);
  EXPECT_DOUBLE_EQ(s.value().points[1].validation_nll, 1.2);
  EXPECT_EQ(s.value().points[1].best_epoch, 2);
  EXPECT_TRUE(std::isinf(s.value().points[2].validation_nll));
  EXPECT_EQ(s.value().points[2].failure, "diverged");
  EXPECT_EQ(s.value().best, 0);
  StatusOr<SearchOutcome> none = ScoreSearch(c, {nullptr, nullptr, nullptr, nullptr, nullptr, nullptr},
                                             {"x", "x", "x", "x", "x", "x"});
  EXPECT_FALSE(none.ok());
}

TEST(RunPlanTest, FoldsAreReplayedToTheirMembersEpochAndMembersStopThere) {
  Config c;
  c.ensemble.members = 2;
  c.train.early_stopping.mode = Switch::kOn;
  const std::vector<MemberSpec> members = MemberSpecs(c, Rows(100, 0, 3), {4, 9});
  EXPECT_EQ(members[1].stop_epoch, 9);
  EXPECT_EQ(members[1].fold, -1);
  const std::vector<MemberSpec> folds = FoldSpecs(c, Rows(100, 0, 3));
  ASSERT_EQ(folds.size(), 6u);
  EXPECT_EQ(JobName(folds[4]), "fold-1-1");
  EXPECT_EQ(folds[4].seed, members[1].seed) << "a member's folds share its seed";
  const std::vector<MemberSpec> replay = FoldSpecsAt(c, Rows(100, 0, 3), {0, 9});
  ASSERT_EQ(replay.size(), 3u) << "member 0 (no epoch) is left out";
  EXPECT_EQ(JobName(replay[1]), "fold-1-1-at-9");
  EXPECT_EQ(replay[1].train.early_stopping.mode, Switch::kOff);
}

TEST(RunPlanTest, AutoEarlyStoppingIsOnForSmallDataCountedBeforeTheHoldout) {
  Config c;
  c.data.small_data_rows = 1000;
  EXPECT_EQ(BaseSpec(c, Rows(900, 99, 0), 0).train.early_stopping.mode, Switch::kOn);
  EXPECT_EQ(BaseSpec(c, Rows(900, 100, 0), 0).train.early_stopping.mode, Switch::kOff);
  c.train.early_stopping.mode = Switch::kOff;
  EXPECT_EQ(BaseSpec(c, Rows(10, 0, 5), 0).train.early_stopping.mode, Switch::kOff);
}

}  // namespace run_plan_test
}  // namespace chorus

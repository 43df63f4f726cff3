#include "coordinator/run_plan.h"

#include <gtest/gtest.h>

#include <cmath>

namespace chorus {
namespace {

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

TEST(RunPlanTest, GridIsTheProductInAFixedOrderWithConfiguredValuesForMissingLists) {
  Config c = SearchConfigFor();
  c.train.optimizer.lr = 0.02;
  const std::vector<GridPoint> grid = SearchGrid(c);
  ASSERT_EQ(grid.size(), 6u);
  EXPECT_EQ(grid[0].hidden, std::vector<int>{8});
  EXPECT_DOUBLE_EQ(grid[1].weight_decay, 0.1) << "weight decay varies faster than width";
  EXPECT_EQ(grid[3].hidden, (std::vector<int>{16, 16}));
  for (const GridPoint& p : grid) EXPECT_DOUBLE_EQ(p.lr, 0.02);
  EXPECT_TRUE(SearchGrid(Config{}).empty());
  const Config applied = WithPoint(c, grid[4]);
  EXPECT_EQ(applied.model.hidden, (std::vector<int>{16, 16}));
  EXPECT_DOUBLE_EQ(applied.train.optimizer.weight_decay, 0.1);
}

TEST(RunPlanTest, SearchJobsUseMemberZerosSeedOnEveryFoldWithoutBasinFits) {
  Config c = SearchConfigFor();
  c.ensemble.basin.method = BasinMethod::kGaussianDiag;
  const std::vector<MemberSpec> specs = SearchSpecs(c, Rows(100, 0, 4));
  ASSERT_EQ(specs.size(), 6u * 4u);
  EXPECT_EQ(JobName(specs[5]), "search-1-1");
  for (const MemberSpec& s : specs) {
    EXPECT_EQ(s.seed, specs[0].seed);
    EXPECT_EQ(s.role, JobRole::kSearch);
    EXPECT_EQ(s.basin.method, BasinMethod::kNone);
    EXPECT_EQ(s.folds, 4);
  }
  const std::vector<MemberSpec> holdout = SearchSpecs(c, Rows(100, 20, 0));
  ASSERT_EQ(holdout.size(), 6u);
  EXPECT_EQ(holdout[2].fold, -1);
  EXPECT_EQ(JobName(holdout[2]), "search-2");
}

MemberResult Scored(double nll, int rows, int best_epoch) {
  MemberResult r;
  r.validation_outputs.resize(rows, 2);
  r.validation_nll = std::vector<double>(static_cast<size_t>(best_epoch) + 2, 9.0);
  r.validation_nll[static_cast<size_t>(best_epoch) - 1] = nll;
  r.best_epoch = best_epoch;
  return r;
}

// Two points, two folds each: point 0's folds hold 30 and 10 rows at NLL 1.0 and 2.0, so its
// row-weighted score is (30 + 20) / 40 = 1.25; point 1 scores 1.2 and wins. A failed job makes
// its point unscorable.
TEST(RunPlanTest, ScoreIsTheRowWeightedNllOfEachPointsHeldOutRows) {
  Config c;
  c.search.weight_decay = {0.0, 0.1, 1.0};
  const MemberResult a = Scored(1.0, 30, 3), b = Scored(2.0, 10, 5), d = Scored(1.2, 20, 4),
                     e = Scored(1.2, 20, 6);
  StatusOr<SearchOutcome> s = ScoreSearch(c, {&a, &b, &d, &e, &a, nullptr}, {"", "", "", "", "", "diverged"});
  ASSERT_TRUE(s.ok()) << s.status().ToString();
  EXPECT_DOUBLE_EQ(s.value().points[0].validation_nll, 1.25);
  EXPECT_DOUBLE_EQ(s.value().points[1].validation_nll, 1.2);
  EXPECT_EQ(s.value().points[0].best_epoch, 3) << "lower median of 3 and 5";
  EXPECT_TRUE(std::isinf(s.value().points[2].validation_nll));
  EXPECT_EQ(s.value().points[2].failure, "diverged");
  EXPECT_EQ(s.value().best, 1);
  StatusOr<SearchOutcome> none = ScoreSearch(c, {nullptr, nullptr, nullptr, nullptr, nullptr, nullptr},
                                             {"x", "x", "x", "x", "x", "x"});
  EXPECT_FALSE(none.ok());
}

TEST(RunPlanTest, MembersStopAtTheLowerMedianOfTheirFoldsBestEpochs) {
  const MemberResult a = Scored(1, 1, 7), b = Scored(1, 1, 3), d = Scored(1, 1, 12), e = Scored(1, 1, 5);
  EXPECT_EQ(StopEpochFromFolds({&a, &b, &d, &e}, true), 5);
  EXPECT_EQ(StopEpochFromFolds({&a, &b, &d}, true), 7);
  EXPECT_EQ(StopEpochFromFolds({&a, &b, &d}, false), 0);
  Config c;
  c.ensemble.members = 2;
  const std::vector<MemberSpec> members = MemberSpecs(c, Rows(100, 0, 3), {4, 9});
  EXPECT_EQ(members[1].stop_epoch, 9);
  EXPECT_EQ(members[1].fold, -1);
  const std::vector<MemberSpec> folds = FoldSpecs(c, Rows(100, 0, 3));
  ASSERT_EQ(folds.size(), 6u);
  EXPECT_EQ(JobName(folds[4]), "fold-1-1");
  EXPECT_EQ(folds[4].seed, members[1].seed) << "a member's folds share its seed";
}

TEST(RunPlanTest, AutoEarlyStoppingIsOnForSmallDataCountedBeforeTheHoldout) {
  Config c;
  c.data.small_data_rows = 1000;
  EXPECT_EQ(BaseSpec(c, Rows(900, 99, 0), 0).train.early_stopping.mode, Switch::kOn);
  EXPECT_EQ(BaseSpec(c, Rows(900, 100, 0), 0).train.early_stopping.mode, Switch::kOff);
  c.train.early_stopping.mode = Switch::kOff;
  EXPECT_EQ(BaseSpec(c, Rows(10, 0, 5), 0).train.early_stopping.mode, Switch::kOff);
}

}  // namespace
}  // namespace chorus

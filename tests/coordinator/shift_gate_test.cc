// The promotion gate's data-shift comparison (coordinator/shift_gate.h) on hand-made bundle
// summaries: matching columns by name, the labels, the limits and the reasons given.
#include "coordinator/shift_gate.h"

#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "common/distribution_shift.h"

namespace chorus {
namespace shift_gate_test {

DistributionSketch Sketch(std::vector<double> values) { return SketchOf(&values); }

// A classifier over classes {a, b} with the numeric columns `numeric` (name, values) and one
// categorical column "site" over {east, west} with the given shares.
Bundle Classifier(const std::vector<std::pair<std::string, std::vector<double>>>& numeric,
                  std::vector<double> site_shares, std::vector<double> class_shares) {
  Bundle b;
  b.class_names = {"a", "b"};
  FeaturePlan& plan = b.preprocessing.plan;
  TrainingSummary& s = b.training_summary;
  s.rows = 100;
  for (size_t k = 0; k < numeric.size(); ++k) {
    plan.columns.push_back({numeric[k].first, false, static_cast<int64_t>(k)});
    ColumnSummary c;
    c.name = numeric[k].first;
    c.numeric = Sketch(numeric[k].second);
    s.columns.push_back(c);
  }
  plan.columns.push_back({"site", true, 0});
  plan.categorical.push_back({"site", {"east", "west"}});
  ColumnSummary site;
  site.name = "site";
  site.categorical = true;
  site.category_shares = std::move(site_shares);
  s.columns.push_back(site);
  s.class_shares = std::move(class_shares);
  return b;
}

TEST(ShiftGateTest, NamesTheShiftedColumnFirstAndRefusesAboveTheLimit) {
  const std::vector<double> same = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10};
  const std::vector<double> moved = {6, 7, 8, 9, 10, 11, 12, 13, 14, 15};
  const Bundle current = Classifier({{"x", same}, {"y", same}}, {0.5, 0.5}, {0.5, 0.5});
  const Bundle candidate = Classifier({{"y", moved}, {"x", same}}, {0.5, 0.5}, {0.5, 0.5});
  const GateLimits limits;
  const ShiftComparison s = CompareTrainingData(current, candidate, limits);
  EXPECT_EQ(s.skipped, "");
  ASSERT_EQ(s.columns.size(), 3u);  // x and y matched by name, whatever their order
  EXPECT_EQ(s.columns[0].column, "y");
  // Exact sketches: half the candidate's rows lie above the current maximum, so KS = 0.5; the
  // PSI is the published formula on the current deciles (1..9 as edges).
  EXPECT_NEAR(s.columns[0].ks, 0.5, 1e-7);  // fractions are stored as floats
  std::vector<double> p(10, 0.1), q(10, 0.0);
  q[5] = q[6] = q[7] = q[8] = 0.1;
  q[9] = 0.6;  // 10..15 all fall past the last edge (9)
  EXPECT_NEAR(s.columns[0].psi, PopulationStabilityIndex(p, q), 1e-6);
  EXPECT_EQ(s.columns[1].psi, 0.0);
  EXPECT_TRUE(std::isnan(s.columns[2].ks));  // categorical: no KS
  ASSERT_EQ(s.refusals.size(), 1u);
  EXPECT_EQ(s.refusals[0].rfind("data shift: PSI above 0.250 (--max-psi) in 1 of 3 columns: y ", 0),
            0u)
      << s.refusals[0];

  GateLimits loose;
  loose.max_psi = 100;
  loose.max_ks = 0.51;
  EXPECT_TRUE(CompareTrainingData(current, candidate, loose).refusals.empty());
  loose.max_ks = 0.4;
  EXPECT_EQ(CompareTrainingData(current, candidate, loose).refusals.size(), 1u);
}

TEST(ShiftGateTest, LabelsAndCategoriesAreMatchedByName) {
  const std::vector<double> v = {1, 2, 3};
  const Bundle current = Classifier({{"x", v}}, {0.5, 0.5}, {0.5, 0.5});
  Bundle candidate = Classifier({{"x", v}}, {0.5, 0.5}, {0.5, 0.5});
  // The candidate's classes in another order, with the same shares per name: no shift.
  candidate.class_names = {"b", "a"};
  candidate.training_summary.class_shares = {0.5, 0.5};
  EXPECT_EQ(CompareTrainingData(current, candidate, GateLimits()).labels.psi, 0.0);
  // A class the current bundle never had takes a fifth of the rows.
  candidate.class_names = {"a", "b", "c"};
  candidate.training_summary.class_shares = {0.4, 0.4, 0.2};
  const ShiftComparison s = CompareTrainingData(current, candidate, GateLimits());
  EXPECT_EQ(s.labels.column, "(labels)");
  EXPECT_NEAR(s.labels.psi, PopulationStabilityIndex({0.5, 0.5, 0.0}, {0.4, 0.4, 0.2}), 1e-12);
  ASSERT_EQ(s.refusals.size(), 1u);
  EXPECT_EQ(s.refusals[0].rfind("data shift: (labels) PSI ", 0), 0u) << s.refusals[0];
}

TEST(ShiftGateTest, UnmatchedColumnsAreListedNotCompared) {
  const std::vector<double> v = {1, 2, 3};
  const Bundle current = Classifier({{"x", v}, {"old", v}}, {0.5, 0.5}, {0.5, 0.5});
  Bundle candidate = Classifier({{"x", v}, {"new", v}}, {0.5, 0.5}, {0.5, 0.5});
  const ShiftComparison s = CompareTrainingData(current, candidate, GateLimits());
  EXPECT_EQ(s.columns.size(), 2u);  // x and site
  EXPECT_EQ(s.unmatched, (std::vector<std::string>{"old (current only)", "new (candidate only)"}));
  EXPECT_TRUE(s.refusals.empty());
}

TEST(ShiftGateTest, RegressionComparesTheTargetAndOldBundlesAreSkipped) {
  Bundle current = Classifier({{"x", {1, 2, 3}}}, {0.5, 0.5}, {});
  current.task = Task::kRegression;
  current.class_names.clear();
  current.training_summary.target = Sketch({10, 20, 30, 40});
  Bundle candidate = current;
  candidate.training_summary.target = Sketch({30, 40, 50, 60});
  const ShiftComparison s = CompareTrainingData(current, candidate, GateLimits());
  EXPECT_EQ(s.labels.column, "(target)");
  EXPECT_NEAR(s.labels.ks, 0.5, 1e-7);
  EXPECT_GT(s.labels.psi, 0.25);
  EXPECT_EQ(s.refusals.size(), 1u);

  Bundle old = current;
  old.training_summary = TrainingSummary();
  const ShiftComparison skipped = CompareTrainingData(old, candidate, GateLimits());
  EXPECT_NE(skipped.skipped.find("current bundle has no training summary"), std::string::npos);
  EXPECT_TRUE(skipped.refusals.empty());
  const nlohmann::json j = ShiftComparisonJson(skipped, old, candidate, 10);
  EXPECT_EQ(j, nlohmann::json({{"skipped", skipped.skipped}}));
}

}  // namespace shift_gate_test
}  // namespace chorus

#include "coordinator/run_comparison.h"

#include <gtest/gtest.h>

#include <string>

#include "tests/testing/sample_report.h"

namespace chorus {
namespace run_comparison_test {

using nlohmann::json;

const ComparedValue& Find(const RunComparison& c, const std::string& key) {
  for (const ComparedValue& v : c.values) {
    if (v.key == key) return v;
  }
  ADD_FAILURE() << "no value " << key;
  return c.values.front();
}

// B: better NLL, worse accuracy, equal ECE, no Brier, another config and two members, one of them
// weighted 0.9.
json VariantB() {
  json b = testing::SampleReport(Task::kClassification);
  b["ensemble"]["test"]["nll"] = b["ensemble"]["test"]["nll"].get<double>() - 0.05;
  b["ensemble"]["test"]["accuracy"] = b["ensemble"]["test"]["accuracy"].get<double>() - 0.01;
  b["ensemble"]["test"].erase("brier");
  b["temperature"] = 1.5;
  b["members"].erase(2);
  b["weights"] = {0.9, 0.1};
  b["config_hash"] = std::string(64, 'd');
  return b;
}

TEST(RunComparisonTest, DeltasAndTheBetterRunFollowEachMetricsDirection) {
  const json a = testing::SampleReport(Task::kClassification), b = VariantB();
  const RunComparison c = CompareReports(a, b, "runs/a", "runs/b");
  const ComparedValue& nll = Find(c, "ensemble.test.nll");
  EXPECT_NEAR(*nll.b - *nll.a, -0.05, 1e-12);
  EXPECT_EQ(nll.better, "b");  // lower NLL
  EXPECT_EQ(Find(c, "ensemble.test.accuracy").better, "a");
  EXPECT_EQ(Find(c, "ensemble.test.ece").better, "equal");
  const ComparedValue& brier = Find(c, "ensemble.test.brier");
  EXPECT_TRUE(brier.a.has_value());
  EXPECT_FALSE(brier.b.has_value());
  EXPECT_EQ(brier.better, "");
  EXPECT_EQ(Find(c, "temperature").better, "");  // no direction
  EXPECT_EQ(*Find(c, "members.finished").b, 2);
  EXPECT_NEAR(*Find(c, "weights.effective_number").a, 1 / (0.25 + 0.09 + 0.04), 1e-12);
  EXPECT_NEAR(*Find(c, "weights.max").b, 0.9, 1e-12);
  EXPECT_TRUE(c.same_data());
  EXPECT_FALSE(c.same_config());
}

TEST(RunComparisonTest, RegressionCoverageIsBetterNearNinetyPercent) {
  const json a = testing::SampleReport(Task::kRegression);
  json b = a;
  b["ensemble"]["test"]["coverage_90"] = 0.9;
  EXPECT_EQ(Find(CompareReports(a, b, "a", "b"), "ensemble.test.coverage_90").better, "b");
}

TEST(RunComparisonTest, TableShowsBothRunsDeltasAndHashVerdicts) {
  const RunComparison c =
      CompareReports(testing::SampleReport(Task::kClassification), VariantB(), "runs/a", "runs/b");
  const std::string table = ComparisonTable(c);
  EXPECT_NE(table.find("A: runs/a\nB: runs/b"), std::string::npos);
  EXPECT_NE(table.find("ensemble test NLL (tuned T)"), std::string::npos);
  EXPECT_NE(table.find("-0.0500  B"), std::string::npos) << table;
  EXPECT_NE(table.find("aaaaaaaaaaaa   aaaaaaaaaaaa"), std::string::npos) << table;
  EXPECT_NE(table.find("equal"), std::string::npos);
  EXPECT_NE(table.find("cccccccccccc   dddddddddddd"), std::string::npos) << table;
  EXPECT_NE(table.find("differ"), std::string::npos);
  EXPECT_EQ(table.find("different data"), std::string::npos);
}

TEST(RunComparisonTest, JsonHasNullsForMissingValues) {
  const json j = ComparisonJson(
      CompareReports(testing::SampleReport(Task::kClassification), VariantB(), "a", "b"));
  EXPECT_EQ(j["a"], "a");
  EXPECT_TRUE(j["same_data"].get<bool>());
  EXPECT_FALSE(j["same_config"].get<bool>());
  bool saw_brier = false;
  for (const json& v : j["values"]) {
    if (v["key"] != "ensemble.test.brier") continue;
    saw_brier = true;
    EXPECT_TRUE(v["b"].is_null());
    EXPECT_TRUE(v["delta"].is_null());
    EXPECT_TRUE(v["better"].is_null());
  }
  EXPECT_TRUE(saw_brier);
}

// Runs of different posterior methods: the basin method as text, and what the method buys and
// costs as values: cheaper is better, a higher shifted-rows AUROC is better; values a report
// lacks (an older report without costs or shift section) are absent on that side.
TEST(RunComparisonTest, MethodsAreComparedByCostDiversityAndShift) {
  json a = testing::SampleReport(Task::kClassification);
  json b = a;
  a["settings"]["basin_method"] = "none";
  b["settings"]["basin_method"] = "laplace_last_layer";
  a["compute"]["cpu_seconds_all_jobs"] = 100.0;
  b["compute"]["cpu_seconds_all_jobs"] = 120.0;
  for (json& m : b["members"]) m["samples"] = 20;
  b["shift"]["predictives"] = json::array({{{"predictive", "one member"}, {"auroc", {{"entropy", 0.9}}}},
                                           {{"predictive", "ensemble"},
                                            {"auroc", {{"entropy", 0.6}, {"mutual_information", 0.7}}}}});
  const RunComparison c = CompareReports(a, b, "a", "b");
  EXPECT_EQ(Find(c, "compute.cpu_seconds_all_jobs").better, "a");
  EXPECT_EQ(*Find(c, "samples_per_member").b, 20);
  const ComparedValue& entropy = Find(c, "shift.ensemble.auroc.entropy");
  EXPECT_FALSE(entropy.a.has_value());
  EXPECT_EQ(*entropy.b, 0.6);  // the ensemble's, not the single member's
  EXPECT_EQ(*Find(c, "shift.ensemble.auroc.mutual_information").b, 0.7);
  a["shift"] = b["shift"];
  a["shift"]["predictives"][1]["auroc"]["mutual_information"] = 0.5;
  EXPECT_EQ(Find(CompareReports(a, b, "a", "b"), "shift.ensemble.auroc.mutual_information").better, "b");
  bool method_differs = false;
  for (const ComparedText& t : c.texts) {
    if (t.key == "basin_method") method_differs = t.a == "none" && t.b == "laplace_last_layer" && !t.equal();
  }
  EXPECT_TRUE(method_differs);
  EXPECT_NE(ComparisonTable(c).find("basin method"), std::string::npos);
}

}  // namespace run_comparison_test
}  // namespace chorus

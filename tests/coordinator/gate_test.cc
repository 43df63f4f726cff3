// The promotion gate (coordinator/gate.h) on hand-picked numbers. Values are exact binary
// fractions, so "exactly at the limit" is exact.
#include "coordinator/gate.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <string>
#include <vector>

namespace chorus {
namespace gate_test {

GateMetrics Classification(double nll, double accuracy, double ece) {
  GateMetrics m;
  m.nll = nll;
  m.accuracy = accuracy;
  m.ece = ece;
  return m;
}

GateMetrics Regression(double nll, double rmse, double coverage_90) {
  GateMetrics m;
  m.nll = nll;
  m.rmse = rmse;
  m.coverage_90 = coverage_90;
  return m;
}

std::vector<std::string> Failed(const GateDecision& d) {
  std::vector<std::string> failed;
  for (const GateCheck& c : d.checks) {
    if (!c.passed) failed.push_back(c.metric);
  }
  return failed;
}

TEST(GateTest, FirstBundleIntoAnEmptyRegistryPasses) {
  const GateDecision d =
      DecideGate(Task::kClassification, Classification(9, 0.1, 0.5), std::nullopt, GateLimits{});
  EXPECT_TRUE(d.promote);
  EXPECT_TRUE(d.checks.empty());
  EXPECT_EQ(d.reasons, std::vector<std::string>{"no current bundle"});
}

TEST(GateTest, ClassificationLimits) {
  const GateMetrics current = Classification(1.0, 0.75, 0.0625);
  GateLimits limits;
  limits.max_nll_increase = 0.25;
  limits.max_accuracy_drop = 0.125;
  limits.max_ece_increase = 0.0625;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double over = std::ldexp(1.0, -20);
  struct Case {
    const char* name;
    GateMetrics candidate;
    std::vector<std::string> failed;
  };
  const std::vector<Case> cases = {
      {"better everywhere", Classification(0.5, 0.875, 0.03125), {}},
      {"equal", current, {}},
      {"exactly at every limit", Classification(1.25, 0.625, 0.125), {}},
      {"nll just over", Classification(1.25 + over, 0.75, 0.0625), {"nll"}},
      {"accuracy just over", Classification(1.0, 0.625 - over, 0.0625), {"accuracy"}},
      {"ece just over", Classification(1.0, 0.75, 0.125 + over), {"ece"}},
      {"worse everywhere", Classification(2.0, 0.5, 0.25), {"nll", "accuracy", "ece"}},
      {"nan nll", Classification(nan, 0.75, 0.0625), {"nll"}},
      {"better nll cannot buy worse ece", Classification(0.25, 0.75, 0.25), {"ece"}},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.name);
    const GateDecision d = DecideGate(Task::kClassification, c.candidate, current, limits);
    ASSERT_EQ(d.checks.size(), 3u);
    EXPECT_EQ(Failed(d), c.failed);
    EXPECT_EQ(d.promote, c.failed.empty());
    EXPECT_EQ(d.reasons.size(), c.failed.empty() ? 1u : c.failed.size());
  }
}

TEST(GateTest, ZeroLimitsRefuseAnyWorsening) {
  const GateLimits zero{0, 0, 0, 0};
  const GateMetrics current = Classification(1.0, 0.75, 0.0625);
  EXPECT_TRUE(DecideGate(Task::kClassification, current, current, zero).promote);
  EXPECT_FALSE(
      DecideGate(Task::kClassification, Classification(1.0, 0.75, 0.0625 + 1e-12), current, zero)
          .promote);
}

TEST(GateTest, RegressionLimitsNllAndRelativeRmseOnly) {
  const GateMetrics current = Regression(2.0, 4.0, 0.875);
  GateLimits limits;
  limits.max_nll_increase = 0.5;
  limits.max_rmse_increase = 0.125;  // of 4.0: 0.5 in target units
  limits.max_accuracy_drop = 0;      // classification limits do not apply
  limits.max_ece_increase = 0;
  struct Case {
    const char* name;
    GateMetrics candidate;
    std::vector<std::string> failed;
  };
  const std::vector<Case> cases = {
      {"better", Regression(1.5, 3.0, 0.875), {}},
      {"exactly at both limits", Regression(2.5, 4.5, 0.875), {}},
      {"coverage is reported, not limited", Regression(2.0, 4.0, 0.125), {}},
      {"rmse just over", Regression(2.0, 4.5 + std::ldexp(1.0, -20), 0.875), {"rmse"}},
      {"nll over", Regression(2.75, 4.0, 0.875), {"nll"}},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.name);
    GateMetrics candidate = c.candidate;
    candidate.accuracy = -1;  // ignored for regression
    const GateDecision d = DecideGate(Task::kRegression, candidate, current, limits);
    ASSERT_EQ(d.checks.size(), 2u);
    EXPECT_EQ(d.checks[1].metric, "rmse");
    EXPECT_DOUBLE_EQ(d.checks[1].allowed, 0.5);
    EXPECT_EQ(Failed(d), c.failed);
    EXPECT_EQ(d.promote, c.failed.empty());
  }
}

TEST(GateTest, BrokenCurrentBundleCanBeReplaced) {
  const double inf = std::numeric_limits<double>::infinity();
  const GateDecision d = DecideGate(Task::kClassification, Classification(1.0, 0.5, 0.0625),
                                    Classification(inf, 0.5, 0.0625), GateLimits{});
  EXPECT_TRUE(d.promote);
}

TEST(GateTest, ReasonNamesMetricNumbersAndFlag) {
  GateLimits limits;
  limits.max_nll_increase = 0.25;
  const GateDecision d = DecideGate(Task::kClassification, Classification(1.5, 0.75, 0.0625),
                                    Classification(1.0, 0.75, 0.0625), limits);
  ASSERT_EQ(d.reasons.size(), 1u);
  EXPECT_EQ(d.reasons[0],
            "nll 1 -> 1.5: worse by 0.5, more than the 0.25 allowed (--max-nll-increase)");
}

TEST(GateTest, JsonHoldsTheTaskMetricsAndLimits) {
  const GateMetrics a = Classification(0.5, 0.875, 0.03125), b = Classification(1.0, 0.75, 0.0625);
  EXPECT_EQ(GateMetricsJson(Task::kClassification, a),
            nlohmann::json({{"nll", 0.5}, {"accuracy", 0.875}, {"ece", 0.03125}}));
  EXPECT_EQ(GateDeltaJson(Task::kClassification, a, b),
            nlohmann::json({{"nll", -0.5}, {"accuracy", 0.125}, {"ece", -0.03125}}));
  EXPECT_EQ(GateMetricsJson(Task::kRegression, Regression(2.0, 3.0, 0.875)),
            nlohmann::json({{"nll", 2.0}, {"rmse", 3.0}, {"coverage_90", 0.875}}));
  const GateLimits limits;
  EXPECT_EQ(GateLimitsJson(Task::kRegression, limits),
            nlohmann::json({{"max_nll_increase", limits.max_nll_increase},
                            {"max_rmse_increase", limits.max_rmse_increase},
                            {"refuse_if_baseline_better", false},
                            {"max_psi", 0.25}, {"max_ks", 1.0}}));
  EXPECT_EQ(GateLimitsJson(Task::kClassification, limits).size(), 6u);
}

}  // namespace gate_test
}  // namespace chorus

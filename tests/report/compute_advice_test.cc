// The size grid priced in CPU-seconds and the cheapest point within the tolerance
// (report/compute_advice.h), on a hand-priced example.
#include "report/compute_advice.h"

#include <gtest/gtest.h>

namespace chorus {
namespace compute_advice_test {

using json = nlohmann::json;

json Point(int members, int samples, double validation_nll, double test_nll) {
  return {{"members", members}, {"samples", samples},
          {"validation_nll", {{"mean", validation_nll}}}, {"nll", {{"mean", test_nll}}}};
}

// Two members, S = 4 samples each, a grid of 1-2 members x 1 or 4 samples.
json Report() {
  return {{"members", json::array({{{"index", 0}}, {{"index", 1}}, {{"index", 2}}})},
          {"size_curve", json::array({Point(1, 1, 0.50, 0.51), Point(2, 1, 0.42, 0.44),
                                      Point(1, 4, 0.45, 0.47), Point(2, 4, 0.40, 0.43)})}};
}

// Member 2's cost is unknown (recovered after a crash): the means are over members 0 and 1,
// training 12, fit 2, samples 2 CPU-seconds. Prices, k (12 + 2) + k (s / 4) 2:
// (1, 1) 14.5; (2, 1) 29; (1, 4) 16; (2, 4) 32.
const std::vector<MemberCpuSeconds> kCosts = {
    {0, MemberResult::CpuSeconds{10, 2, 4}}, {1, MemberResult::CpuSeconds{14, 2, 0}}, {2, std::nullopt}};

TEST(ComputeAdviceTest, PricesTheGridFromTheMembersMeanCost) {
  json r = Report();
  AddComputeAdvice(kCosts, 4, 50.0, 0.03, r);
  const double prices[] = {14.5, 29, 16, 32};
  for (size_t i = 0; i < 4; ++i) EXPECT_DOUBLE_EQ(r["size_curve"][i]["cpu_seconds"].get<double>(), prices[i]);
  EXPECT_EQ(r["members"][0]["cpu_seconds"], (json{{"training", 10.0}, {"basin_fit", 2.0}, {"samples", 4.0}}));
  EXPECT_FALSE(r["members"][2].contains("cpu_seconds"));
  EXPECT_EQ(r["compute"]["members_costed"], 2);
  EXPECT_DOUBLE_EQ(r["compute"]["mean_per_member"]["training"].get<double>(), 12);
  EXPECT_DOUBLE_EQ(r["compute"]["cpu_seconds_all_jobs"].get<double>(), 50);
}

TEST(ComputeAdviceTest, ChoosesTheCheapestPointWithinTheTolerance) {
  // Best validation NLL 0.40 (2 x 4). Within 0.03 (<= 0.43): 2 x 1 (29) and 2 x 4 (32).
  json r = Report();
  AddComputeAdvice(kCosts, 4, 50.0, 0.03, r);
  EXPECT_EQ(r["compute"]["best"]["members"], 2);
  EXPECT_EQ(r["compute"]["best"]["samples"], 4);
  EXPECT_EQ(r["compute"]["advice"]["members"], 2);
  EXPECT_EQ(r["compute"]["advice"]["samples"], 1);
  EXPECT_DOUBLE_EQ(r["compute"]["advice"]["nll"].get<double>(), 0.44);
  const std::string text = r["compute"]["text"];
  EXPECT_NE(text.find("within 0.03 nats"), std::string::npos) << text;
  EXPECT_NE(text.find("2 members x 1 sample (29 CPU-seconds, validation NLL 0.4200)"), std::string::npos) << text;
  EXPECT_NE(text.find("Best found: 2 members x 4 samples (32 CPU-seconds"), std::string::npos) << text;
  // Within 0.06 (<= 0.46) one member with its 4 samples (16) joins and is cheapest.
  json wider = Report();
  AddComputeAdvice(kCosts, 4, 50.0, 0.06, wider);
  EXPECT_EQ(wider["compute"]["advice"]["members"], 1);
  EXPECT_EQ(wider["compute"]["advice"]["samples"], 4);
  // Tolerance 0: the best point itself.
  json exact = Report();
  AddComputeAdvice(kCosts, 4, 50.0, 0.0, exact);
  EXPECT_EQ(exact["compute"]["advice"], exact["compute"]["best"]);
  EXPECT_NE(exact["compute"]["text"].get<std::string>().find("also the best found"), std::string::npos);
}

TEST(ComputeAdviceTest, WithoutAnyCostSaysSoAndPricesNothing) {
  json r = Report();
  AddComputeAdvice({{0, std::nullopt}, {1, std::nullopt}}, 4, 0.0, 0.01, r);
  EXPECT_FALSE(r["compute"].contains("advice"));
  EXPECT_NE(r["compute"]["text"].get<std::string>().find("not priced"), std::string::npos);
  for (const json& p : r["size_curve"]) EXPECT_FALSE(p.contains("cpu_seconds"));
}

}  // namespace compute_advice_test
}  // namespace chorus

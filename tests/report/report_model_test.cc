#include "report/report_model.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/sample_report.h"

namespace chorus {
namespace report_model_test {

using nlohmann::json;

TEST(ReportModelTest, ReportJsonHoldsTheChartDataBesideTheStableCore) {
  const json c = testing::SampleReport(Task::kClassification);
  ASSERT_EQ(c["reliability"]["calibrated"].size(), 5u);
  for (const char* key : {"lower", "upper", "count", "confidence", "accuracy"}) {
    EXPECT_TRUE(c["reliability"]["uncalibrated"][0].contains(key)) << key;
  }
  const json& h = c["uncertainty"]["epistemic_histogram"];
  EXPECT_EQ(h["edges"].size(), 11u);
  EXPECT_EQ(h["groups"][0]["name"], "correct");
  EXPECT_EQ(h["groups"][1]["name"], "wrong");
  EXPECT_EQ(c["uncertainty"]["selective_accuracy"].size(), 11u);
  const json r = testing::SampleReport(Task::kRegression);
  EXPECT_FALSE(r.contains("reliability"));
  EXPECT_EQ(r["interval_coverage"]["calibrated"][2]["nominal"], 0.9);
  EXPECT_EQ(r["uncertainty"]["epistemic_histogram"]["groups"][1]["name"], "outside 90% interval");
  EXPECT_EQ(r["uncertainty"]["selective_rmse"].size(), 11u);
}

TEST(ReportModelTest, ValidateReportNamesTheFirstBadField) {
  const json good = testing::SampleReport(Task::kClassification);
  EXPECT_TRUE(ValidateReport(good, "r.json").ok());
  json no_temperature = good;
  no_temperature.erase("temperature");
  const Status st = ValidateReport(no_temperature, "r.json");
  EXPECT_EQ(st.ExitCode(), 2);
  EXPECT_NE(st.message().find("r.json: field temperature is missing or not a number"),
            std::string::npos)
      << st.message();
  json short_weights = good;
  short_weights["weights"].erase(0);
  EXPECT_NE(ValidateReport(short_weights, "r.json").message().find("weights"), std::string::npos);
  json bad_task = good;
  bad_task["task"] = "ranking";
  EXPECT_FALSE(ValidateReport(bad_task, "r.json").ok());
  EXPECT_FALSE(ValidateReport(json::array(), "r.json").ok());
}

TEST(ReportModelTest, ReadRunReportRefusesMissingAndMalformedFilesWithExitTwo) {
  const std::string dir = testing::MakeTempDir("chorus-report-model");
  StatusOr<json> missing = ReadRunReport(dir);
  EXPECT_EQ(missing.status().ExitCode(), 2);
  EXPECT_NE(missing.status().message().find(dir + "/report.json"), std::string::npos);
  testing::WriteTextFile(dir + "/report.json", "{\"name\": ");
  EXPECT_EQ(ReadRunReport(dir).status().ExitCode(), 2);
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

}  // namespace report_model_test
}  // namespace chorus

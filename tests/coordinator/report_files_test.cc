#include "coordinator/report_files.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "report/report_html.h"
#include "report/report_model.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/sample_report.h"

namespace chorus {
namespace report_files_test {

using nlohmann::json;

TEST(ReportFilesTest, WriteReportFilesStoresTheManifestAndRendersTheResult) {
  const std::string dir = testing::MakeTempDir("chorus-report-files");
  testing::WriteTextFile(dir + "/manifest.json",
                         R"({"status": "complete", "workers": [{"host": "node-3"}]})");
  ASSERT_TRUE(WriteReportFiles(dir, testing::SampleReport(Task::kRegression)).ok());
  StatusOr<json> written = ReadRunReport(dir);
  ASSERT_TRUE(written.ok()) << written.status().ToString();
  EXPECT_EQ(written.value()["manifest"]["workers"][0]["host"], "node-3");
  EXPECT_EQ(testing::ReadTextFile(dir + "/report.html"), ReportHtml(written.value()));
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

}  // namespace report_files_test
}  // namespace chorus

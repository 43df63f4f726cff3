// report.html in a real browser: headless Chromium (Debian package chromium) loads the reports of
// small real runs and must log no console message (the page has no scripts, so any message is a
// blocked load or a parse problem), every chart <svg> in the rendered DOM must draw data, and a
// screenshot is kept under the build directory (test-artifacts/) for people to look at.
#include <gtest/gtest.h>

#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/registry_history.h"

namespace chorus {
namespace report_browser_test {

namespace fs = std::filesystem;

constexpr const char* kChromiumFlags =
    " --headless --no-sandbox --disable-gpu --disable-quic --no-first-run"
    " --disable-background-networking --disable-component-update --disable-sync --hide-scrollbars";

// What Chromium made of a page: the serialised DOM and the console messages it logged.
struct LoadedPage {
  std::string dom;
  std::vector<std::string> console;
};

size_t Count(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t at = text.find(needle); at != std::string::npos; at = text.find(needle, at + 1)) ++n;
  return n;
}

// The data marks (elements with class "data ...") of each chart <svg> of a DOM, in page order.
std::vector<size_t> DataMarksPerChart(const std::string& dom) {
  std::vector<size_t> marks;
  for (size_t at = dom.find("<svg class=\"chart\""); at != std::string::npos;
       at = dom.find("<svg class=\"chart\"", at + 1)) {
    marks.push_back(Count(dom.substr(at, dom.find("</svg>", at) - at), "class=\"data "));
  }
  return marks;
}

class ReportBrowserTest : public ::testing::Test {
 protected:
  void SetUp() override {
    const auto found = testing::RunShell("command -v chromium || command -v chromium-browser", 30);
    if (found.exit_code != 0) {
      GTEST_SKIP() << "chromium is not installed (Debian package chromium); skipping the browser "
                      "check of report.html";
    }
    chromium_ = found.output.substr(0, found.output.find('\n'));
    dir_ = testing::MakeTempDir("chorus-browser");
    testing::WriteDemoData(dir_);
    artifacts_ = std::string(CHORUS_BINARY_DIR) + "/test-artifacts";
    fs::create_directories(artifacts_);
  }
  void TearDown() override {
    if (!dir_.empty() && !HasFailure()) fs::remove_all(dir_);
  }

  // Runs Chromium with a fresh profile on `page` with `args`; stdout and stderr go to files.
  testing::CommandResult Chromium(const std::string& args, const std::string& page) {
    const std::string profile = dir_ + "/profile-" + std::to_string(++launches_);
    return testing::RunShell(chromium_ + kChromiumFlags + " --user-data-dir=" + profile + " " +
                                 args + " file://" + page + " >" + profile + ".out 2>" + profile +
                                 ".err",
                             180);
  }

  LoadedPage Load(const std::string& page) {
    const auto r = Chromium("--enable-logging=stderr --v=0 --dump-dom", page);
    EXPECT_EQ(r.exit_code, 0) << r.output;
    const std::string base = dir_ + "/profile-" + std::to_string(launches_);
    LoadedPage loaded{testing::ReadTextFile(base + ".out"), {}};
    std::istringstream log(testing::ReadTextFile(base + ".err"));
    for (std::string line; std::getline(log, line);) {
      if (line.find("CONSOLE") != std::string::npos) loaded.console.push_back(line);
    }
    return loaded;
  }

  // Screenshots `page` at 1280 x height pixels into test-artifacts/NAME.png and checks the PNG.
  void Screenshot(const std::string& page, int height, const std::string& name) {
    const std::string png = artifacts_ + "/" + name + ".png";
    fs::remove(png);
    const auto r =
        Chromium("--window-size=1280," + std::to_string(height) + " --screenshot=" + png, page);
    EXPECT_EQ(r.exit_code, 0) << r.output;
    const std::string bytes = fs::exists(png) ? testing::ReadTextFile(png) : "";
    ASSERT_GT(bytes.size(), 24u) << "no screenshot at " << png;
    EXPECT_EQ(bytes.substr(0, 8), "\x89PNG\r\n\x1a\n");
    const auto byte = [&](size_t i) {
      return static_cast<unsigned>(static_cast<uint8_t>(bytes[i]));
    };
    EXPECT_EQ(byte(16) << 24 | byte(17) << 16 | byte(18) << 8 | byte(19), 1280u);  // IHDR width
    fs::copy_file(page, artifacts_ + "/" + name + ".html", fs::copy_options::overwrite_existing);
    std::printf("screenshot of %s: %s\n", page.c_str(), png.c_str());
  }

  // Rewrites a run's report with `chorus report` (adding the manifest's facts) and loads it: no
  // console messages, `charts` charts, each drawing data.
  void ExpectCleanReport(const std::string& run, size_t charts) {
    const auto r = testing::RunShell(testing::BinaryPath("chorus") + " report " + run, 120);
    ASSERT_EQ(r.exit_code, 0) << r.output;
    const LoadedPage page = Load(run + "/report.html");
    EXPECT_TRUE(page.console.empty()) << page.console.front();
    EXPECT_NE(page.dom.find("Run facts"), std::string::npos);
    const std::vector<size_t> marks = DataMarksPerChart(page.dom);
    ASSERT_EQ(marks.size(), charts);
    for (size_t i = 0; i < marks.size(); ++i) EXPECT_GE(marks[i], 2u) << "chart " << i;
  }

  std::string chromium_, dir_, artifacts_;
  int launches_ = 0;
};

TEST_F(ReportBrowserTest, ConsoleCheckSeesMessagesOnAControlPage) {
  // Without this the check below could pass because the log says nothing at all.
  const std::string page = dir_ + "/control.html";
  testing::WriteTextFile(page,
                         "<!DOCTYPE html><html><body><p>control</p>"
                         "<script>console.error('chorus-control-message')</script></body></html>");
  const LoadedPage loaded = Load(page);
  ASSERT_EQ(loaded.console.size(), 1u);
  EXPECT_NE(loaded.console[0].find("chorus-control-message"), std::string::npos);
}

TEST_F(ReportBrowserTest, ClassificationReportWithBasinSamplesLoadsCleanly) {
  const std::string run = testing::RunDemo(
      dir_, "alarms",
      testing::DemoClassificationYaml(
          "alarms", 3,
          "train: {epochs: 4, batch_size: 32}\nensemble: {members: 4, basin: "
          "{method: gaussian_lowrank, epochs: 1, snapshots: 4, rank: 3, samples: 5}}\n"));
  ASSERT_FALSE(run.empty());
  // Size curves against members and against samples (3 + 3), reliability diagram and its bin
  // counts, epistemic histogram, selective accuracy.
  ExpectCleanReport(run, 10);
  Screenshot(run + "/report.html", 4800, "report");
}

TEST_F(ReportBrowserTest, RegressionReportLoadsCleanly) {
  const std::string run = testing::RunDemo(
      dir_, "hours",
      testing::DemoRegressionYaml(
          "hours", 5,
          "train: {epochs: 6, batch_size: 32, optimizer: {lr: 0.01, clip_norm: 5.0}}\n"
          "ensemble: {members: 3}\n"));
  ASSERT_FALSE(run.empty());
  // Size curves against members (3), interval coverage, epistemic histogram, selective RMSE.
  ExpectCleanReport(run, 6);
  Screenshot(run + "/report.html", 3900, "report_regression");
}

TEST_F(ReportBrowserTest, RegistryHistoryLoadsCleanly) {
  const std::string registry = dir_ + "/registry";
  ASSERT_EQ(testing::MakeRegistryWithHistory(registry), "");
  const auto r = testing::RunShell(testing::BinaryPath("chorus") + " history --registry " + registry, 60);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const LoadedPage page = Load(registry + "/history.html");
  EXPECT_TRUE(page.console.empty()) << page.console.front();
  EXPECT_NE(page.dom.find("Rollbacks"), std::string::npos);
  const std::vector<size_t> marks = DataMarksPerChart(page.dom);
  ASSERT_EQ(marks.size(), 3u);  // guard NLL and accuracy over the decisions, data shift
  for (size_t i = 0; i < marks.size(); ++i) EXPECT_GE(marks[i], 5u) << "chart " << i;
  Screenshot(registry + "/history.html", 1400, "history");
}

}  // namespace report_browser_test
}  // namespace chorus

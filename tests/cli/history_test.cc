// `chorus history` (coordinator/history_command.h) on a registry made by real promotes and a
// rollback: every decision and rollback on the page with the decision files' own figures, and
// refusals of what chorus did not write.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "report/html_text.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/registry_history.h"

namespace chorus {
namespace history_test {

namespace fs = std::filesystem;
using nlohmann::json;

size_t Count(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t at = text.find(needle); at != std::string::npos; at = text.find(needle, at + 1)) ++n;
  return n;
}

class HistoryTest : public ::testing::Test {
 protected:
  void SetUp() override {
    root_ = testing::MakeTempDir("chorus-history");
    registry_ = root_ + "/registry";
    const std::string failed = testing::MakeRegistryWithHistory(registry_);
    ASSERT_EQ(failed, "");
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(root_);
  }
  testing::CommandResult History(const std::string& flags = "") {
    return testing::RunShell(testing::BinaryPath("chorus") + " history --registry " + registry_ + " " + flags, 60);
  }
  std::vector<json> Decisions() const {
    std::vector<json> all;
    for (const auto& v : fs::directory_iterator(registry_ + "/versions")) {
      all.push_back(json::parse(testing::ReadTextFile((v.path() / "decision.json").string())));
    }
    for (const auto& r : fs::directory_iterator(registry_ + "/refused")) {
      all.push_back(json::parse(testing::ReadTextFile(r.path().string())));
    }
    return all;
  }

  std::string root_, registry_;
};

TEST_F(HistoryTest, EveryDecisionAndRollbackIsOnThePageWithItsOwnFigures) {
  const testing::CommandResult r = History();
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find(registry_ + "/history.html\n"), std::string::npos) << r.output;
  const std::string page = testing::ReadTextFile(registry_ + "/history.html");
  EXPECT_NE(page.find("3 decisions (2 promoted, 1 refused), 1 rollback"), std::string::npos);
  const std::vector<json> decisions = Decisions();
  ASSERT_EQ(decisions.size(), 3u);
  const std::string current = fs::read_symlink(registry_ + "/current").filename().string();
  for (const json& d : decisions) {
    SCOPED_TRACE(d["version"].get<std::string>());
    EXPECT_EQ(Count(page, d["version"].get<std::string>()),
              1u + (d["verdict"] == "promote" ? 1u : 0u) + (d["version"] == current ? 1u : 0u))
        << "once in the table, promoted versions once more in the rollback row, the current one in the header";
    for (const char* metric : {"nll", "accuracy", "ece"}) {
      EXPECT_NE(page.find("<td>" + FormatFixed(d["candidate"]["metrics"][metric].get<double>(), 4) + "</td>"),
                std::string::npos) << metric;
    }
  }
  EXPECT_EQ(Count(page, ">refuse<"), 1u);
  EXPECT_EQ(Count(page, ">promote<") + Count(page, ">promote (current)<"), 2u);
  // The rollback went back to the first version, which is current now and highlighted.
  EXPECT_NE(page.find("promote (current)"), std::string::npos);
  EXPECT_NE(page.find("current <span class=\"hash\">" + current + "</span>"), std::string::npos);
  // Two charts (guard NLL and accuracy), each with a point per candidate and per current bundle
  // (3 candidates + 2 decisions that had a current bundle); then the shift chart: the largest
  // column PSI and the labels' PSI of the 2 decisions that had a current bundle, and the two
  // ends of the 0.25 line.
  ASSERT_EQ(Count(page, "<svg class=\"chart\""), 3u);
  EXPECT_EQ(Count(page, "class=\"data point\""), 2u * 5u + 2u * 2u + 2u);
  // All runs trained on the same rows: no shift, the first column (station) named.
  EXPECT_EQ(Count(page, "<td class=\"nowrap\">station 0.000</td>"), 2u);
  // No scripts, nothing loaded from anywhere.
  EXPECT_EQ(page.find("<script"), std::string::npos);
  EXPECT_EQ(page.find("src="), std::string::npos);
  EXPECT_EQ(page.find("href="), std::string::npos);
  // -o elsewhere; the registry is not changed by it.
  ASSERT_EQ(History("-o " + root_ + "/h.html").exit_code, 0);
  EXPECT_EQ(testing::ReadTextFile(root_ + "/h.html"), page);
}

TEST_F(HistoryTest, RecordsChorusDidNotWriteAreRefusedWithTheirPlace) {
  const std::string refused = fs::directory_iterator(registry_ + "/refused")->path().string();
  json d = json::parse(testing::ReadTextFile(refused));
  d["candidate"]["metrics"].erase("nll");
  testing::WriteTextFile(refused, d.dump());
  testing::CommandResult r = History();
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find(refused + ": expected \"candidate\""), std::string::npos) << r.output;
  testing::WriteTextFile(refused, "{not json");
  r = History();
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find(refused + ": not JSON"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(registry_ + "/history.html"));
  r = testing::RunShell(testing::BinaryPath("chorus") + " history --registry " + root_ + "/nothing", 60);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("not a registry"), std::string::npos) << r.output;
}

}  // namespace history_test
}  // namespace chorus

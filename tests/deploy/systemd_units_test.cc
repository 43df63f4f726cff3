// deploy/systemd/'s units pass `systemd-analyze verify` (Debian package systemd): known keys,
// valid values, a timer whose service exists, and ExecStart programs that exist. The units name
// /usr/local/bin/{chorus,chorus-worker,chorus-nightly}; the test verifies copies that point at
// this build and at deploy/nightly.sh instead.
#include <gtest/gtest.h>

#include <filesystem>
#include <sstream>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace systemd_units_test {

namespace fs = std::filesystem;

std::string Replace(std::string text, const std::string& from, const std::string& to) {
  for (size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + to.size())) {
    text.replace(at, from.size(), to);
  }
  return text;
}

TEST(SystemdUnitsTest, PassSystemdAnalyzeVerify) {
  if (testing::RunShell("command -v systemd-analyze", 10).exit_code != 0) {
    GTEST_SKIP() << "systemd-analyze is not installed (Debian package systemd)";
  }
  const std::string dir = testing::MakeTempDir("chorus-systemd");
  fs::create_directories(dir + "/bin");
  fs::create_directories(dir + "/units");
  for (const auto& [name, target] :
       {std::pair<std::string, std::string>{"chorus", testing::BinaryPath("chorus")},
        {"chorus-worker", testing::BinaryPath("chorus-worker")},
        {"chorus-nightly", testing::SourcePath("deploy/nightly.sh")}}) {
    fs::create_symlink(target, dir + "/bin/" + name);
  }
  std::string units;
  for (const auto& e : fs::directory_iterator(testing::SourcePath("deploy/systemd"))) {
    const std::string ext = e.path().extension().string();
    if (ext != ".service" && ext != ".timer") continue;
    const std::string copy = dir + "/units/" + e.path().filename().string();
    testing::WriteTextFile(
        copy, Replace(testing::ReadTextFile(e.path().string()), "/usr/local/bin/", dir + "/bin/"));
    units += " " + copy;
  }
  for (const char* unit :
       {"chorus-worker.service", "chorus-nightly.service", "chorus-nightly.timer"}) {
    EXPECT_NE(units.find(unit), std::string::npos) << "deploy/systemd/" << unit << " is missing";
  }
  const auto r = testing::RunShell("systemd-analyze verify" + units, 60);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  // A warning (an unknown key, a value that does not parse) still exits 0: fail on any message
  // about our units.
  std::istringstream lines(r.output);
  for (std::string line; std::getline(lines, line);) {
    EXPECT_EQ(line.find("chorus"), std::string::npos) << line;
  }
  if (!HasFailure()) fs::remove_all(dir);
}

}  // namespace systemd_units_test
}  // namespace chorus

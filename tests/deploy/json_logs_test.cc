// `--log-format json` on the long-running commands: every line `chorus run` (in process and with
// local workers) and `chorus-worker` write to stderr is one JSON object with "time", "level" and
// "msg" (the embedded workers' worker.log too), and stdout keeps the summary table.
#include <gtest/gtest.h>
#include <signal.h>

#include <filesystem>
#include <nlohmann/json.hpp>
#include <regex>
#include <sstream>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace json_logs_test {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::RunShell;

// Every line of `text` as a log object; fails the test for a line that is not one.
std::vector<json> LogObjects(const std::string& text) {
  static const std::regex time(R"(\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z)");
  std::vector<json> objects;
  std::istringstream lines(text);
  for (std::string line; std::getline(lines, line);) {
    const json j = json::parse(line, nullptr, false);
    if (!j.is_object() || !j.contains("time") || !j.contains("level") || !j["msg"].is_string() ||
        !std::regex_match(j["time"].get<std::string>(), time) ||
        !(j["level"] == "info" || j["level"] == "warning" || j["level"] == "error")) {
      ADD_FAILURE() << "not a JSON log line: " << line;
      continue;
    }
    objects.push_back(j);
  }
  return objects;
}

// True if some object has every field of `fields` (a JSON object) with the same value.
bool HasLine(const std::vector<json>& objects, const std::string& msg_prefix,
             const json& fields = json::object()) {
  for (const json& o : objects) {
    if (o["msg"].get<std::string>().rfind(msg_prefix, 0) != 0) continue;
    bool all = true;
    for (const auto& [key, value] : fields.items()) all = all && o.contains(key) && o[key] == value;
    if (all) return true;
  }
  return false;
}

class JsonLogsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-json-logs");
    const auto r = RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                            "/data --train-rows 600 --test-rows 200");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    testing::WriteTextFile(
        dir_ + "/config.yaml",
        "run: {name: logs, seed: 2}\n"
        "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
        "       categorical: [station]}\n"
        "model: {hidden: [16]}\ntrain: {epochs: 2, batch_size: 32}\nensemble: {members: 2}\n");
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // Runs `chorus run` with `args`; returns {stderr, stdout}.
  std::pair<std::string, std::string> Run(const std::string& args) {
    const auto r = RunShell(testing::BinaryPath("chorus") + " run " + dir_ + "/config.yaml " +
                                args + " 2> " + dir_ + "/stderr.txt > " + dir_ + "/stdout.txt",
                            120);
    EXPECT_EQ(r.exit_code, 0) << testing::ReadTextFile(dir_ + "/stderr.txt");
    return {testing::ReadTextFile(dir_ + "/stderr.txt"),
            testing::ReadTextFile(dir_ + "/stdout.txt")};
  }

  std::string dir_;
};

TEST_F(JsonLogsTest, InProcessRunLogsOneJsonObjectPerLine) {
  const auto [err, out] = Run("--out " + dir_ + "/runs --workers 0 --log-format json");
  const std::vector<json> lines = LogObjects(err);
  EXPECT_TRUE(HasLine(lines, "run directory: "));
  EXPECT_TRUE(HasLine(lines, "member 1 epoch 2/2", {{"member", 1}, {"epoch", 2}, {"epochs", 2}}));
  EXPECT_TRUE(HasLine(lines, "member 0 finished"));
  EXPECT_TRUE(HasLine(lines, "trained 2 of 2 members"));
  EXPECT_NE(out.find("ensemble, tuned T"), std::string::npos) << out;  // the table stays on stdout
}

TEST_F(JsonLogsTest, RunWithLocalWorkersLogsJsonAndSoDoTheWorkers) {
  const auto [err, out] = Run("--out " + dir_ + "/runs --workers 2 --log-format json");
  const std::vector<json> lines = LogObjects(err);
  EXPECT_TRUE(HasLine(lines, "coordinator listening on 127.0.0.1:", {{"local_workers", 2}}));
  EXPECT_TRUE(HasLine(lines, "jobs 2/2 finished"));
  for (const auto& e : fs::directory_iterator(dir_ + "/runs")) {
    if (fs::exists(e.path() / "worker.log")) {  // the embedded workers' stderr, if they wrote any
      LogObjects(testing::ReadTextFile((e.path() / "worker.log").string()));
    }
  }
}

TEST_F(JsonLogsTest, TextIsStillTheDefault) {
  const auto [err, out] = Run("--out " + dir_ + "/runs --workers 0");
  EXPECT_EQ(err.rfind("run directory: ", 0), 0u) << err;
  EXPECT_EQ(err.find('{'), std::string::npos) << err;
}

TEST_F(JsonLogsTest, WorkerLogsRetriesAndErrorsAsJson) {
  // No coordinator there: it retries registration (warnings) until SIGTERM stops it.
  testing::WriteTextFile(dir_ + "/token", "0123456789abcdef0123\n");
  testing::BackgroundProcess worker(
      {testing::BinaryPath("chorus-worker"), "--coordinator", "127.0.0.1:1", "--token-file",
       dir_ + "/token", "--max-backoff", "0.2", "--cache-dir", "", "--log-format", "json"},
      dir_ + "/worker.log");
  EXPECT_TRUE(testing::WaitFor(
      [&] {
        return testing::ReadTextFile(dir_ + "/worker.log").find("retrying") != std::string::npos;
      },
      20));
  worker.Signal(SIGTERM);
  EXPECT_EQ(worker.Wait(20), 0);
  const std::vector<json> lines = LogObjects(testing::ReadTextFile(dir_ + "/worker.log"));
  ASSERT_FALSE(lines.empty());
  EXPECT_EQ(lines[0]["level"], "warning");
  // A token file that cannot be read: exit 2 with an error line.
  const auto r =
      RunShell(testing::BinaryPath("chorus-worker") + " --coordinator 127.0.0.1:1 --token-file " +
                   dir_ + "/missing --log-format json",
               30);
  EXPECT_EQ(r.exit_code, 2);
  const std::vector<json> error = LogObjects(r.output);
  ASSERT_EQ(error.size(), 1u) << r.output;
  EXPECT_EQ(error[0]["level"], "error");
}

}  // namespace json_logs_test
}  // namespace chorus

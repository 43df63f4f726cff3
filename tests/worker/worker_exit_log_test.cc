// chorus-worker's last log line: how it ended and its peak resident set (peak_rss_bytes), which
// bench/worker_memory.sh reads to measure a worker's memory.
#include <gtest/gtest.h>
#include <signal.h>

#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <vector>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace worker_exit_log_test {

using nlohmann::json;

// VmHWM of process `pid` in bytes (the kernel's high-water mark of its resident set), or -1.
long long HighWaterMark(int pid) {
  std::ifstream status("/proc/" + std::to_string(pid) + "/status");
  for (std::string line; std::getline(status, line);) {
    if (line.rfind("VmHWM:", 0) == 0) return std::stoll(line.substr(6)) * 1024;
  }
  return -1;
}

TEST(WorkerExitLogTest, LastLineCarriesExitCodeAndTheWorkersOwnPeak) {
  const std::string dir = testing::MakeTempDir("chorus-worker-exit");
  testing::WriteTextFile(dir + "/token", "0123456789abcdef0123\n");
  // The parent holds 128 MiB when it starts the worker: a figure that carried the parent's peak
  // across execve (getrusage's ru_maxrss does) would show it.
  std::vector<char> ballast(size_t{128} << 20, 1);
  // No coordinator there: the worker retries registration until SIGTERM stops it.
  testing::BackgroundProcess worker(
      {testing::BinaryPath("chorus-worker"), "--coordinator", "127.0.0.1:1", "--token-file",
       dir + "/token", "--max-backoff", "0.2", "--cache-dir", "", "--log-format", "json"},
      dir + "/worker.log");
  std::vector<char>().swap(ballast);
  ASSERT_TRUE(testing::WaitFor(
      [&] { return testing::ReadTextFile(dir + "/worker.log").find("retrying") != std::string::npos; },
      20));
  const long long seen = HighWaterMark(worker.pid());
  ASSERT_GT(seen, 0);
  worker.Signal(SIGTERM);
  ASSERT_EQ(worker.Wait(20), 0);
  std::istringstream lines(testing::ReadTextFile(dir + "/worker.log"));
  json last;
  for (std::string line; std::getline(lines, line);) last = json::parse(line, nullptr, false);
  ASSERT_TRUE(last.is_object());
  EXPECT_EQ(last["msg"].get<std::string>().rfind("chorus-worker: exiting with code 0; peak resident set ", 0), 0u)
      << last.dump();
  EXPECT_EQ(last["level"], "info");
  EXPECT_EQ(last["exit_code"], 0);
  ASSERT_TRUE(last["peak_rss_bytes"].is_number_integer()) << last.dump();
  // The high-water mark only grows, so the figure at exit is at least the one read earlier; an
  // idle worker grows little after that, and nothing of the parent's 128 MiB is in it.
  const long long peak = last["peak_rss_bytes"].get<long long>();
  EXPECT_GE(peak, seen);
  EXPECT_LT(peak, seen + (16LL << 20));
  EXPECT_LT(peak, 100LL << 20);
  std::filesystem::remove_all(dir);
}

}  // namespace worker_exit_log_test
}  // namespace chorus

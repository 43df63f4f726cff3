// Runs with chorus-worker processes over gRPC on loopback: determinism across worker counts,
// a worker killed mid-job, a coordinator killed and resumed, token refusal, late joiners, TLS.
// Every process is started by the test, bounded in time, and killed if still running at the end.
#include <gtest/gtest.h>
#include <signal.h>

#include <filesystem>
#include <fstream>
#include <map>
#include <thread>

#include <nlohmann/json.hpp>

#include "tests/testing/process.h"
#include "tests/testing/run_dir.h"
#include "tests/testing/reference.h"
#include "tests/testing/sanitizer.h"

namespace chorus {
namespace workers_test {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::BackgroundProcess;
using testing::CountEvents;
using testing::JobResults;
using testing::ReadEvents;
using testing::RunDirUnder;
using testing::WaitFor;
using testing::WaitForCoordinator;

// Epochs of jobs that must still be running when a worker or the coordinator is killed: divided
// by the build's slowdown, so that they last about as long under a sanitizer.
constexpr int kKillWorkerEpochs = 3000 / testing::kSanitizerSlowdown;
constexpr int kResumeEpochs = 600 / testing::kSanitizerSlowdown;

class WorkersTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-workers");
    const auto r = testing::RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                                     "/data --train-rows 1200 --test-rows 400");
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // A classification config; `epochs` sets how long each job takes, `cluster` is YAML for the
  // cluster section's contents. Minibatches are cut into two parts, so that every comparison also
  // checks that parts computed on whatever threads a worker has give the in-process bits. Short
  // runs keep the small-data defaults (cross-fitting, early stopping); long ones (50 epochs or
  // more, for killing a worker or coordinator mid-job) use a holdout and no early stopping, so
  // that each of their few jobs really takes that long.
  std::string WriteConfig(const std::string& name, int members, int epochs, const std::string& cluster) {
    const std::string path = dir_ + "/" + name + ".yaml";
    const bool long_jobs = epochs >= 50;
    testing::WriteTextFile(path, "run: {name: " + name + ", seed: 5}\n"
        "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
        "       categorical: [station]" + (long_jobs ? ", validation: {fraction: 0.2}" : "") + "}\n"
        "model: {hidden: [48, 48]}\n"
        "train: {epochs: " + std::to_string(epochs) + ", batch_size: 32, parts: 2" +
        (long_jobs ? ", early_stopping: {mode: off}" : "") + "}\n"
        "ensemble: {members: " + std::to_string(members) + "}\n"
        "cluster: {" + cluster + "}\n");
    return path;
  }

  std::vector<std::string> Chorus(const std::vector<std::string>& args) {
    std::vector<std::string> argv = {testing::BinaryPath("chorus")};
    argv.insert(argv.end(), args.begin(), args.end());
    return argv;
  }

  // The in-process results of the same members: the reference every worker run must match byte
  // for byte (the cluster section changes speed only, not results).
  std::map<std::string, std::string> InProcessResults(const std::string& name, int members, int epochs) {
    const std::string out = dir_ + "/reference";
    fs::remove_all(out);
    const std::string config = WriteConfig(name, members, epochs, "local_workers: 0");
    const auto r = testing::RunShell(testing::BinaryPath("chorus") + " run " + config + " --out " + out, 300);
    EXPECT_EQ(r.exit_code, 0) << r.output;
    // In process, each job's finished event carries what it cost (report/compute_advice.h).
    for (const json& e : testing::ReadEvents(RunDirUnder(out))) {
      if (e["event"] != "member_finished" && e["event"] != "job_finished") continue;
      EXPECT_TRUE(e.contains("cpu_seconds") && e["cpu_seconds"]["training"].get<double>() > 0) << e.dump();
    }
    return JobResults(RunDirUnder(out));
  }

  std::unique_ptr<BackgroundProcess> StartWorker(const json& coordinator, const std::string& token_file,
                                                 const std::vector<std::string>& extra = {}) {
    std::vector<std::string> argv = {testing::BinaryPath("chorus-worker"), "--coordinator",
                                     coordinator["address"].get<std::string>(), "--token-file", token_file,
                                     "--cache-dir", dir_ + "/cache", "--exit-when-done", "--max-backoff", "0.5"};
    argv.insert(argv.end(), extra.begin(), extra.end());
    return std::make_unique<BackgroundProcess>(argv, dir_ + "/workers.log");
  }

  std::string dir_;
};

TEST_F(WorkersTest, ResultsAreBitIdenticalWithOneTwoThreeWorkersAndInProcess) {
  const std::string cfg = WriteConfig("det", 3, 4, "lease_seconds: 10");
  const auto reference = InProcessResults("det-reference", 3, 4);
  ASSERT_EQ(reference.size(), 33u);  // small data: 3 members and twice their 3 x 5 fold jobs
  for (const char* workers : {"1", "2", "3"}) {
    SCOPED_TRACE(std::string(workers) + " workers");
    const std::string out = dir_ + "/runs-" + workers;
    const auto r = testing::RunShell(testing::BinaryPath("chorus") + " run " + cfg + " --workers " +
                                     workers + " --out " + out, 300);
    ASSERT_EQ(r.exit_code, 0) << r.output;
    EXPECT_TRUE(JobResults(RunDirUnder(out)) == reference);
    EXPECT_EQ(CountEvents(RunDirUnder(out), "worker_registered"), std::stoi(workers));
  }
}

TEST_F(WorkersTest, KilledWorkersJobIsLeasedAgainAndTheRunCompletesIdentically) {
  const std::string cfg = WriteConfig("kill-worker", 2, kKillWorkerEpochs,
                                      "local_workers: 0, listen: \"127.0.0.1:0\", lease_seconds: 1");
  const std::string out = dir_ + "/runs";
  BackgroundProcess coordinator(Chorus({"run", cfg, "--out", out}), dir_ + "/coordinator.log");
  const json info = WaitForCoordinator(out);
  ASSERT_FALSE(info.is_null()) << testing::ReadTextFile(dir_ + "/coordinator.log");
  const std::string run = RunDirUnder(out);
  auto doomed = StartWorker(info, info["token_file"]);
  ASSERT_TRUE(WaitFor([&] { return CountEvents(run, "job_leased") >= 1; }, 30));
  doomed->Signal(SIGKILL);
  doomed->Wait(5);
  auto rescuer = StartWorker(info, info["token_file"]);
  EXPECT_EQ(coordinator.Wait(240), 0) << testing::ReadTextFile(dir_ + "/coordinator.log");
  EXPECT_GE(CountEvents(run, "lease_expired"), 1);
  EXPECT_EQ(CountEvents(run, "member_finished"), 2);
  EXPECT_EQ(rescuer->Wait(30), 0);
  EXPECT_TRUE(JobResults(run) == InProcessResults("kill-worker-reference", 2, kKillWorkerEpochs));
}

TEST_F(WorkersTest, KilledCoordinatorResumesWithoutRerunningFinishedJobs) {
  const std::string cfg = WriteConfig("resume", 4, kResumeEpochs, "local_workers: 1, lease_seconds: 2");
  const std::string out = dir_ + "/runs";
  {
    BackgroundProcess coordinator(Chorus({"run", cfg, "--out", out}), dir_ + "/coordinator.log");
    ASSERT_TRUE(WaitFor([&] {
      const std::string run = RunDirUnder(out);
      return !run.empty() && fs::exists(run + "/events.jsonl") && CountEvents(run, "member_finished") >= 1;
    }, 120)) << testing::ReadTextFile(dir_ + "/coordinator.log");
    coordinator.Signal(SIGKILL);
    coordinator.Wait(5);
  }
  const std::string run = RunDirUnder(out);
  const int finished_before = CountEvents(run, "member_finished");
  ASSERT_LT(finished_before, 4) << "the kill came too late to test anything";
  const auto r = testing::RunShell(testing::BinaryPath("chorus") + " run --resume " + run, 300);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  std::map<int, int> finishes;
  for (const json& e : ReadEvents(run)) {
    if (e["event"] == "member_finished") ++finishes[e["member"].get<int>()];
  }
  ASSERT_EQ(finishes.size(), 4u);
  for (const auto& [member, count] : finishes) EXPECT_EQ(count, 1) << "member " << member << " ran twice";
  EXPECT_TRUE(JobResults(run) == InProcessResults("resume-reference", 4, kResumeEpochs));
  EXPECT_TRUE(fs::exists(run + "/report.json"));
}

TEST_F(WorkersTest, WrongTokenIsRefusedAndAWorkerJoiningLateGetsTheJobs) {
  const std::string cfg = WriteConfig("token", 2, 3, "local_workers: 0, listen: \"127.0.0.1:0\"");
  const std::string out = dir_ + "/runs";
  BackgroundProcess coordinator(Chorus({"run", cfg, "--out", out}), dir_ + "/coordinator.log");
  const json info = WaitForCoordinator(out);
  ASSERT_FALSE(info.is_null());
  const std::string run = RunDirUnder(out);
  testing::WriteTextFile(dir_ + "/wrong.token", "not-the-token-at-all\n");
  auto intruder = StartWorker(info, dir_ + "/wrong.token");
  EXPECT_EQ(intruder->Wait(30), 2) << "a refused worker exits with code 2";
  EXPECT_GE(CountEvents(run, "call_refused"), 1);
  EXPECT_EQ(CountEvents(run, "worker_registered"), 0);
  EXPECT_EQ(CountEvents(run, "job_leased"), 0);
  auto late = StartWorker(info, info["token_file"]);
  EXPECT_EQ(coordinator.Wait(120), 0) << testing::ReadTextFile(dir_ + "/coordinator.log");
  EXPECT_EQ(CountEvents(run, "member_finished"), 2);
}

// TLS with a server certificate made by the openssl command-line tool for 127.0.0.1.
TEST_F(WorkersTest, WorkerThatDoesNotTrustTheServerCertificateCannotConnect) {
  const std::string make_cert =
      "openssl req -x509 -newkey rsa:2048 -nodes -days 1 -subj /CN=chorus-test "
      "-addext subjectAltName=IP:127.0.0.1,DNS:localhost ";
  ASSERT_EQ(testing::RunShell(make_cert + "-keyout " + dir_ + "/key.pem -out " + dir_ + "/cert.pem").exit_code, 0);
  ASSERT_EQ(testing::RunShell(make_cert + "-keyout " + dir_ + "/other-key.pem -out " + dir_ + "/other.pem").exit_code, 0);
  const std::string cfg = WriteConfig("tls", 2, 3, "local_workers: 0, listen: \"127.0.0.1:0\", tls: {cert: " +
                                      dir_ + "/cert.pem, key: " + dir_ + "/key.pem}");
  const std::string out = dir_ + "/runs";
  BackgroundProcess coordinator(Chorus({"run", cfg, "--out", out}), dir_ + "/coordinator.log");
  const json info = WaitForCoordinator(out);
  ASSERT_FALSE(info.is_null());
  const std::string run = RunDirUnder(out);
  auto distrustful = StartWorker(info, info["token_file"], {"--tls-ca", dir_ + "/other.pem"});
  std::this_thread::sleep_for(std::chrono::seconds(3));
  EXPECT_EQ(CountEvents(run, "worker_registered"), 0) << "the handshake must fail";
  distrustful->Signal(SIGTERM);
  EXPECT_EQ(distrustful->Wait(10), 0);
  auto trusting = StartWorker(info, info["token_file"], {"--tls-ca", dir_ + "/cert.pem"});
  EXPECT_EQ(coordinator.Wait(120), 0) << testing::ReadTextFile(dir_ + "/coordinator.log");
  EXPECT_EQ(CountEvents(run, "member_finished"), 2);
}

}  // namespace workers_test
}  // namespace chorus

// A coordinator and a worker on two hosts joined by one network link, simulated with two network
// namespaces and a veth pair (iproute2): the link goes down mid-job, the far worker's lease must
// expire and a worker on the coordinator's side must finish the run. Every address lives inside
// the namespaces the test makes (one private /30), so no traffic leaves them. Needs root; skips,
// printing why, where namespaces cannot be made. Processes and namespaces are removed on every
// path, and every wait is bounded.
#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "tests/testing/process.h"
#include "tests/testing/run_dir.h"
#include "tests/testing/reference.h"
#include "tests/testing/sanitizer.h"

namespace chorus {
namespace netns_test {

using testing::CountEvents;
using testing::ReadEvents;
using testing::RunDirUnder;
using testing::WaitForCoordinator;

namespace fs = std::filesystem;
using nlohmann::json;
using testing::BackgroundProcess;
using testing::WaitFor;

// The iproute2 `ip` executable, or "" if there is none.
std::string FindIp() {
  for (const char* path : {"/usr/sbin/ip", "/sbin/ip", "/usr/bin/ip", "/bin/ip"}) {
    if (access(path, X_OK) == 0) return path;
  }
  return "";
}

// Two namespaces, A and B, named after this process's pid and joined by a veth pair: A's end has
// 10.211.S.1/30, B's end 10.211.S.2/30 (S from the pid), loopback is up in both. Owns what it
// made: the destructor deletes both namespaces, which deletes the veth pair with them once the
// processes inside have exited. Thread safety: not thread-safe.
class NamespacePair {
 public:
  explicit NamespacePair(std::string ip)
      : ip_(std::move(ip)), suffix_(std::to_string(getpid())),
        subnet_("10.211." + std::to_string(getpid() % 256) + ".") {}
  ~NamespacePair() {
    for (const std::string& ns : made_) testing::RunShell(ip_ + " netns delete " + ns, 30);
  }
  NamespacePair(const NamespacePair&) = delete;
  NamespacePair& operator=(const NamespacePair&) = delete;

  // Creates both namespaces. Returns "" on success, else why not (the failing command's output).
  std::string Create() {
    for (const std::string& ns : {Name('a'), Name('b')}) {
      const testing::CommandResult r = testing::RunShell(ip_ + " netns add " + ns, 30);
      if (r.exit_code != 0) return "`ip netns add " + ns + "` failed: " + r.output;
      made_.push_back(ns);
    }
    return "";
  }

  // Joins the namespaces with the veth pair, addresses it and brings every link up. Returns "" on
  // success, else the failing command and its output.
  std::string Connect() {
    const std::string a = Name('a'), b = Name('b');
    return Run({"link add " + Veth('a') + " netns " + a + " type veth peer name " + Veth('b') +
                    " netns " + b,
                "-n " + a + " addr add " + address_a() + "/30 dev " + Veth('a'),
                "-n " + b + " addr add " + subnet_ + "2/30 dev " + Veth('b'),
                "-n " + a + " link set lo up", "-n " + b + " link set lo up",
                "-n " + a + " link set " + Veth('a') + " up",
                "-n " + b + " link set " + Veth('b') + " up"});
  }

  // Takes B's end of the link down: nothing passes between A and B any more.
  std::string TakeLinkDown() {
    return Run({"-n " + Name('b') + " link set " + Veth('b') + " down"});
  }

  // `argv` run inside namespace A or B (`ip netns exec` execs it: the pid stays the program's).
  std::vector<std::string> InA(const std::vector<std::string>& argv) const { return In('a', argv); }
  std::vector<std::string> InB(const std::vector<std::string>& argv) const { return In('b', argv); }

  // A's address on the link; B reaches A only through it.
  std::string address_a() const { return subnet_ + "1"; }

 private:
  std::string Name(char side) const { return std::string("chorus-") + side + "-" + suffix_; }
  std::string Veth(char side) const { return std::string("chv") + side + suffix_; }

  std::vector<std::string> In(char side, const std::vector<std::string>& argv) const {
    std::vector<std::string> full = {ip_, "netns", "exec", Name(side)};
    full.insert(full.end(), argv.begin(), argv.end());
    return full;
  }

  // Runs each `ip` command in order; "" if all succeeded, else the first failure.
  std::string Run(const std::vector<std::string>& commands) const {
    for (const std::string& c : commands) {
      const testing::CommandResult r = testing::RunShell(ip_ + " " + c, 30);
      if (r.exit_code != 0) return "`ip " + c + "` failed: " + r.output;
    }
    return "";
  }

  const std::string ip_;
  const std::string suffix_;
  const std::string subnet_;  // "10.211.S."
  std::vector<std::string> made_;
};

// The worker named by the run's first job_leased event, or "".
std::string FirstLeaseHolder(const std::string& run_dir) {
  for (const json& e : ReadEvents(run_dir)) {
    if (e["event"] == "job_leased") return e["worker"];
  }
  return "";
}

// Whether a worker has a data set in its cache (written atomically once fetched in full).
bool HasCachedData(const std::string& cache_dir) {
  std::error_code ec;
  for (const auto& e : fs::directory_iterator(cache_dir, ec)) {
    if (e.path().extension() == ".data") return true;
  }
  return false;
}

class NetnsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-netns");
    const auto r = testing::RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                                     "/data --train-rows 1200 --test-rows 400");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    testing::WriteTextFile(dir_ + "/token", "netns-test-token-5f0c2a9e71d4b386\n");
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // Two members of ~3 s each in any build (epochs divided by the sanitizer slowdown; a holdout
  // and no early stopping, so there are no fold jobs and each job runs all its epochs),
  // listening on `listen` with a one-second lease.
  std::string WriteConfig(const std::string& listen) {
    const std::string path = dir_ + "/netns.yaml";
    testing::WriteTextFile(path, "run: {name: netns, seed: 5}\n"
        "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
        "       categorical: [station], validation: {fraction: 0.2}}\n"
        "model: {hidden: [48, 48]}\n"
        "train: {epochs: " + std::to_string(3000 / testing::kSanitizerSlowdown) +
        ", batch_size: 32, early_stopping: {mode: off}}\n"
        "ensemble: {members: 2}\n"
        "cluster: {local_workers: 0, listen: \"" + listen + "\", token_file: " + dir_ +
        "/token, lease_seconds: 1}\n");
    return path;
  }

  // A chorus-worker for `address` with its own data cache, exiting once the run is done.
  std::vector<std::string> WorkerArgv(const std::string& address, const std::string& cache) const {
    return {testing::BinaryPath("chorus-worker"), "--coordinator", address, "--token-file",
            dir_ + "/token", "--cache-dir", cache, "--exit-when-done", "--max-backoff", "0.5"};
  }

  std::string dir_;
};

TEST_F(NetnsTest, LinkDownMidJobLeaseExpiresAndAnotherWorkerFinishes) {
  const std::string ip = FindIp();
  if (geteuid() != 0) GTEST_SKIP() << "network namespaces need root; running as uid " << geteuid();
  if (ip.empty()) GTEST_SKIP() << "no `ip` executable (Debian package iproute2)";
  NamespacePair net(ip);  // declared before the processes: they die before the namespaces go
  if (const std::string why = net.Create(); !why.empty()) GTEST_SKIP() << why;
  ASSERT_EQ(net.Connect(), "");
  const std::string out = dir_ + "/runs";
  const std::string cfg = WriteConfig(net.address_a() + ":0");
  BackgroundProcess coordinator(net.InA({testing::BinaryPath("chorus"), "run", cfg, "--out", out}),
                                dir_ + "/coordinator.log");
  const json info = WaitForCoordinator(out);
  ASSERT_FALSE(info.is_null()) << testing::ReadTextFile(dir_ + "/coordinator.log");
  const std::string address = info["address"], run = RunDirUnder(out);
  BackgroundProcess far(net.InB(WorkerArgv(address, dir_ + "/cache-b")), dir_ + "/far.log");
  ASSERT_TRUE(WaitFor([&] {
    return CountEvents(run, "job_leased") >= 1 && HasCachedData(dir_ + "/cache-b");
  }, 30)) << testing::ReadTextFile(dir_ + "/far.log");
  const std::string far_id = FirstLeaseHolder(run);
  ASSERT_EQ(net.TakeLinkDown(), "");
  ASSERT_TRUE(WaitFor([&] { return CountEvents(run, "lease_expired") >= 1; }, 15));
  BackgroundProcess near(net.InA(WorkerArgv(address, dir_ + "/cache-a")), dir_ + "/near.log");
  EXPECT_EQ(coordinator.Wait(180), 0) << testing::ReadTextFile(dir_ + "/coordinator.log");
  EXPECT_EQ(near.Wait(30), 0) << testing::ReadTextFile(dir_ + "/near.log");
  int finished = 0;
  for (const json& e : ReadEvents(run)) {
    if (e["event"] != "member_finished") continue;
    ++finished;
    EXPECT_NE(e["worker"], far_id) << "the worker behind the dead link cannot have finished a job";
  }
  EXPECT_EQ(finished, 2);
}

}  // namespace netns_test
}  // namespace chorus

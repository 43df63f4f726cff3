// deploy/slurm/chorus.sbatch on a real Slurm cluster (Debian packages slurm-wlm and munge): the
// test starts munged, slurmctld and slurmd as a one-node cluster on loopback (proctrack/linuxproc,
// task/none; its own key, socket, state, spool and ports in a temp dir), submits the batch script
// with sbatch, adapted only through its argument and environment, and checks that the run whose
// members a Slurm-started chorus-worker trained has job results byte-identical to the embedded
// default (`chorus run CONFIG`: local workers on loopback). It cancels what is left and stops the
// daemons at the end. Skips, saying why, only where the daemons cannot start (not root, packages
// missing, a daemon that does not come up).
#include <gtest/gtest.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <map>
#include <memory>
#include <regex>
#include <sstream>

#include "tests/testing/process.h"
#include "tests/testing/run_dir.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace slurm_test {

using testing::JobResults;

namespace fs = std::filesystem;
using testing::BackgroundProcess;
using testing::RunShell;

// A TCP port on 127.0.0.1 that was free a moment ago.
int FreePort() {
  const int fd = socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  socklen_t len = sizeof addr;
  bind(fd, reinterpret_cast<sockaddr*>(&addr), len);
  getsockname(fd, reinterpret_cast<sockaddr*>(&addr), &len);
  close(fd);
  return ntohs(addr.sin_port);
}

// The last `bytes` of a log file, for messages.
std::string Tail(const std::string& path, size_t bytes = 2000) {
  std::ifstream f(path);
  const std::string text((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
  return text.size() > bytes ? text.substr(text.size() - bytes) : text;
}

// munged, slurmctld and slurmd for one node named localhost, all under `dir`. Destruction cancels
// every job, waits for them to end, then stops the daemons (SIGTERM, then SIGKILL).
class SlurmCluster {
 public:
  explicit SlurmCluster(std::string dir) : dir_(std::move(dir)) {}
  ~SlurmCluster() { Stop(); }

  // Starts the daemons and waits until the node is idle; returns why not, or "" when it is.
  std::string Start() {
    for (const char* daemon : {"/usr/sbin/munged", "/usr/sbin/slurmctld", "/usr/sbin/slurmd"}) {
      if (!fs::exists(daemon)) {
        return std::string(daemon) + " is missing (packages munge, slurm-wlm)";
      }
    }
    if (geteuid() != 0) return "the Slurm daemons need root";
    if (std::string why = StartMunge(); !why.empty()) return why;
    WriteSlurmConf();
    slurmctld_ = std::make_unique<BackgroundProcess>(
        std::vector<std::string>{"/usr/sbin/slurmctld", "-D", "-f", Conf()},
        dir_ + "/slurmctld.out");
    slurmd_ = std::make_unique<BackgroundProcess>(
        std::vector<std::string>{"/usr/sbin/slurmd", "-D", "-f", Conf(), "-N", "localhost"},
        dir_ + "/slurmd.out");
    const bool idle =
        testing::WaitFor([&] { return Slurm("sinfo -h -o %t", 10).output == "idle\n"; }, 30);
    if (!idle) {
      return "the node did not come up:\nslurmctld: " + Tail(dir_ + "/slurmctld.out") +
             "\nslurmd: " + Tail(dir_ + "/slurmd.out");
    }
    return "";
  }

  // Runs a Slurm client command line against this cluster.
  testing::CommandResult Slurm(const std::string& command_line, int timeout_seconds = 30) const {
    return RunShell("SLURM_CONF=" + Conf() + " " + command_line, timeout_seconds);
  }

  std::string Conf() const { return dir_ + "/slurm.conf"; }

 private:
  std::string StartMunge() {
    const std::string munge = dir_ + "/munge";
    fs::create_directories(munge);
    const auto key = RunShell("umask 077 && head -c 1024 /dev/urandom > " + munge + "/munge.key");
    if (key.exit_code != 0) return "cannot write a munge key: " + key.output;
    munged_ = std::make_unique<BackgroundProcess>(
        std::vector<std::string>{"/usr/sbin/munged", "--foreground", "--force",
                                 "--key-file=" + munge + "/munge.key", "--socket=" + Socket(),
                                 "--pid-file=" + munge + "/munged.pid",
                                 "--seed-file=" + munge + "/seed"},
        dir_ + "/munged.out");
    if (!testing::WaitFor([&] { return fs::exists(Socket()); }, 10)) {
      return "munged did not start: " + Tail(dir_ + "/munged.out");
    }
    return "";
  }

  std::string Socket() const { return dir_ + "/munge/munge.socket"; }

  void WriteSlurmConf() {
    for (const char* sub : {"state", "spool"}) fs::create_directories(dir_ + "/" + sub);
    std::ostringstream c;
    c << "ClusterName=chorustest\nSlurmctldHost=localhost(127.0.0.1)\n"
      << "SlurmctldPort=" << FreePort() << "\nSlurmdPort=" << FreePort() << "\n"
      << "SlurmUser=root\nSlurmdUser=root\nAuthType=auth/munge\nCredType=cred/munge\n"
      << "AuthInfo=socket=" << Socket() << "\nStateSaveLocation=" << dir_ << "/state\n"
      << "SlurmdSpoolDir=" << dir_ << "/spool\nSlurmctldPidFile=" << dir_ << "/slurmctld.pid\n"
      << "SlurmdPidFile=" << dir_ << "/slurmd.pid\nProctrackType=proctrack/linuxproc\n"
      << "TaskPlugin=task/none\nJobAcctGatherType=jobacct_gather/none\n"
      << "AccountingStorageType=accounting_storage/none\nMpiDefault=none\nMailProg=/bin/true\n"
      << "SchedulerType=sched/builtin\nSelectType=select/cons_tres\nSelectTypeParameters=CR_CPU\n"
      << "ReturnToService=2\nKillWait=5\n"
      << "NodeName=localhost NodeAddr=127.0.0.1 CPUs=2 State=UNKNOWN\n"
      << "PartitionName=debug Nodes=localhost Default=YES MaxTime=10 State=UP\n";
    testing::WriteTextFile(Conf(), c.str());
  }

  void Stop() {
    if (slurmctld_) {
      Slurm("scancel --user=root", 10);
      testing::WaitFor(
          [&] {
            const auto queue = Slurm("squeue -h", 10);
            return queue.exit_code != 0 || queue.output.empty();  // no jobs, or no controller
          },
          30);
    }
    for (auto* p : {&slurmd_, &slurmctld_, &munged_}) {
      if (*p == nullptr) continue;
      (*p)->Signal(SIGTERM);
      (*p)->Wait(10);
      p->reset();  // SIGKILL if it is still running
    }
  }

  std::string dir_;
  std::unique_ptr<BackgroundProcess> munged_, slurmctld_, slurmd_;
};

// The run directory under `out` (`runs/<name>-<time>` or `runs/slurm-<job>/<name>-<time>`).
std::string RunDirUnder(const std::string& out) {
  if (!fs::exists(out)) return "";
  for (const auto& e : fs::recursive_directory_iterator(out)) {
    if (e.is_regular_file() && e.path().filename() == "manifest.json") {
      return e.path().parent_path().string();
    }
  }
  return "";
}

class SlurmTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-slurm");
    cluster_ = std::make_unique<SlurmCluster>(dir_);
  }
  void TearDown() override {
    cluster_.reset();  // no daemon or job outlives the test
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // Small demo data, a token, and two configs that differ only in `cluster` (which changes speed,
  // not results): reference.yaml (the embedded default) and slurm.yaml (remote workers only).
  void WriteInputs() {
    const auto r = RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                            "/data --train-rows 1200 --test-rows 400");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    const std::string members =
        "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
        "       categorical: [station]}\n"
        "model: {hidden: [32]}\ntrain: {epochs: 4, batch_size: 32}\nensemble: {members: 3}\n";
    testing::WriteTextFile(dir_ + "/reference.yaml",
                           "run: {name: reference, seed: 11}\n" + members);
    testing::WriteTextFile(dir_ + "/slurm.yaml",
                           "run: {name: slurm, seed: 11}\n" + members +
                               "cluster: {local_workers: 0, listen: \"0.0.0.0:0\", "
                               "token_file: token, lease_seconds: 10}\n");
    const std::string token = "umask 077 && od -An -N24 -tx1 /dev/urandom | tr -d ' \\n' > ";
    ASSERT_EQ(RunShell(token + dir_ + "/token").exit_code, 0);
  }

  // Submits deploy/'s batch script for slurm.yaml on this cluster's one node; returns the job id.
  std::string Submit() {
    const auto r = cluster_->Slurm(
        "CHORUS_BIN=" + std::string(CHORUS_BINARY_DIR) + " CHORUS_OUT=" + dir_ + "/runs" +
        " sbatch --parsable --nodes=1 --cpus-per-task=2 --time=5 --chdir=" + dir_ +
        " --output=" + dir_ + "/job.out " + testing::SourcePath("deploy/slurm/chorus.sbatch") +
        " " + dir_ + "/slurm.yaml");
    EXPECT_EQ(r.exit_code, 0) << r.output;
    return r.output.substr(0, r.output.find_first_of(";\n"));
  }

  // Waits up to `seconds` for the job to end; returns "STATE EXIT:SIGNAL" ("COMPLETED 0:0"), or
  // the state it is still in.
  std::string WaitForJob(const std::string& job, double seconds) {
    static const std::regex over(
        "^(COMPLETED|FAILED|CANCELLED|TIMEOUT|NODE_FAIL|OUT_OF_MEMORY|"
        "BOOT_FAIL|DEADLINE|PREEMPTED) ");
    std::string state;
    testing::WaitFor(
        [&] {
          const std::string text = cluster_->Slurm("scontrol -o show job " + job, 10).output;
          std::smatch s, c;
          std::regex_search(text, s, std::regex(R"(JobState=(\w+))"));
          std::regex_search(text, c, std::regex(R"( ExitCode=(\d+:\d+))"));
          state = s[1].str() + " " + c[1].str();
          return std::regex_search(state, over);
        },
        seconds);
    return state;
  }

  std::string dir_;
  std::unique_ptr<SlurmCluster> cluster_;
};

TEST_F(SlurmTest, BatchScriptRunMatchesTheEmbeddedDefault) {
  if (const std::string why = cluster_->Start(); !why.empty()) {
    GTEST_SKIP() << "no Slurm cluster: " << why;
  }
  ASSERT_NO_FATAL_FAILURE(WriteInputs());
  const auto r = RunShell(testing::BinaryPath("chorus") + " run " + dir_ +
                              "/reference.yaml --out " + dir_ + "/reference-runs",
                          120);
  ASSERT_EQ(r.exit_code, 0) << r.output;

  const std::string job = Submit();
  EXPECT_EQ(WaitForJob(job, 90), "COMPLETED 0:0") << Tail(dir_ + "/job.out");
  const std::string run_dir = RunDirUnder(dir_ + "/runs/slurm-" + job);
  ASSERT_FALSE(run_dir.empty()) << Tail(dir_ + "/job.out");
  const auto reference = JobResults(RunDirUnder(dir_ + "/reference-runs"));
  EXPECT_EQ(reference.size(), 33u);  // small data: 3 members and twice their 3 x 5 fold jobs
  EXPECT_TRUE(JobResults(run_dir) == reference)
      << "the Slurm run's members differ from the embedded run's";
  // The members came from the worker srun started: the coordinator trained none itself.
  EXPECT_NE(testing::ReadTextFile(run_dir + "/events.jsonl").find("\"worker_registered\""),
            std::string::npos);
  EXPECT_NE(testing::ReadTextFile(run_dir + "/manifest.json").find("\"complete\""),
            std::string::npos);
}

}  // namespace slurm_test
}  // namespace chorus

#include "coordinator/run_command.h"

#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <thread>

#include <nlohmann/json.hpp>

#include "common/basin_scale.h"
#include "common/file_util.h"
#include "common/gemm.h"
#include "common/log_format.h"
#include "common/rng.h"
#include "coordinator/bundle_writer.h"
#include "coordinator/cluster_run.h"
#include "coordinator/config_loader.h"
#include "coordinator/run_directory.h"
#include "coordinator/run_report.h"
#include "coordinator/terminal.h"
#include "proto/result_codec.h"
#include "worker/local_trainer.h"

namespace chorus {
namespace {

using nlohmann::json;

struct Inputs {
  Config config;
  PreparedData data;
  std::optional<Matrix> true_probabilities;
  std::string config_hash;
};

StatusOr<Inputs> LoadInputs(const RunOptions& options) {
  Inputs in;
  const std::string path = options.resume_dir.empty() ? options.config_path : options.resume_dir + "/config.yaml";
  CHORUS_ASSIGN_OR_RETURN(in.config, LoadConfigFile(path));
  if (!options.out_dir.empty()) in.config.run.out_dir = options.out_dir;
  if (options.threads >= 0) in.config.compute.threads = options.threads;
  if (options.workers >= 0) in.config.cluster.local_workers = options.workers;
  CHORUS_ASSIGN_OR_RETURN(in.data, LoadPreparedData(in.config.data, in.config.run.seed));
  if (!in.config.data.true_probabilities.empty()) {
    CHORUS_ASSIGN_OR_RETURN(in.true_probabilities,
                            LoadTrueProbabilities(in.config.data.true_probabilities, in.data));
  }
  in.config_hash = ConfigHash(in.config);
  return in;
}

std::vector<MemberSpec> PlanMembers(const Config& c) {
  std::vector<MemberSpec> specs;
  for (int i = 0; i < c.ensemble.members; ++i) {
    specs.push_back({i, Derive(c.run.seed, static_cast<uint64_t>(i)), c.model, c.train, c.ensemble.basin});
  }
  return specs;
}

bool InProcess(const Config& c) { return c.cluster.local_workers == 0 && c.cluster.listen.empty(); }

std::string HostName() {
  char buf[256] = {};
  gethostname(buf, sizeof buf - 1);
  return buf;
}

// Who trained the members: the workers that registered, or this process.
using WorkersSeen = std::vector<std::pair<std::string, std::string>>;

json Manifest(const Inputs& in, const std::string& status, const std::string& cause, double seconds,
              const WorkersSeen& workers = {}) {
  json seen = json::array();
  for (const auto& [id, host] : workers) seen.push_back({{"id", id}, {"host", host}});
  json seeds = json::array();
  for (const MemberSpec& s : PlanMembers(in.config)) seeds.push_back(std::to_string(s.seed));
  const unsigned cores = std::thread::hardware_concurrency();
  return {{"status", status}, {"cause", cause}, {"chorus_version", CHORUS_VERSION},
          {"config_hash", in.config_hash}, {"data_hash", in.data.hash},
          {"run_seed", std::to_string(in.config.run.seed)}, {"member_seeds", seeds},
          {"wall_seconds", seconds}, {"gemm_backend", GemmBackendName()},
          {"coordinator", {{"host", HostName()}, {"cores", cores},
                           {"mode", InProcess(in.config) ? "in-process" : "workers"}}},
          {"workers", seen}};
}

// On resume: the config and data must be the ones the run started with.
Status CheckResumable(const RunDirectory& dir, const Inputs& in) {
  CHORUS_ASSIGN_OR_RETURN(std::string text, ReadFileToString(dir.File("manifest.json"), 1 << 24));
  const json m = json::parse(text, nullptr, false);
  if (m.is_discarded()) return Status::InvalidInput(dir.File("manifest.json") + ": not JSON");
  if (m.value("config_hash", "") != in.config_hash || m.value("data_hash", "") != in.data.hash) {
    return Status::InvalidInput(dir.path() + ": the config or the data changed since the run started");
  }
  if (m.value("status", "") == "complete") return Status::InvalidInput(dir.path() + ": run already complete");
  return Status::Ok();
}

// Results already on disk that decode against this run's hashes.
std::vector<bool> FinishedOnDisk(const RunDirectory& dir, const Inputs& in, int jobs) {
  std::vector<bool> done(static_cast<size_t>(jobs), false);
  for (int i = 0; i < jobs; ++i) {
    const std::string path = dir.path() + "/jobs/" + std::to_string(i) + "/result.pb";
    if (!std::filesystem::exists(path)) continue;
    StatusOr<std::string> bytes = ReadFileToString(path);
    done[i] = bytes.ok() && DecodeJobResult(bytes.value(), path, in.data.hash, in.config_hash).ok();
  }
  return done;
}

// Trains the unfinished members in this process, storing each result as it finishes.
std::vector<std::string> TrainInProcess(const Inputs& in, RunDirectory& dir, const std::vector<bool>& finished) {
  std::vector<MemberSpec> specs;
  for (const MemberSpec& s : PlanMembers(in.config)) {
    if (!finished[s.index]) specs.push_back(s);
  }
  const std::vector<int> widths = NetworkFor(in.config.model, in.data).widths();
  const BasinConfig& basin = in.config.ensemble.basin;
  ProgressPrinter printer(stderr, static_cast<int>(specs.size()),
                          in.config.train.epochs + (basin.method == BasinMethod::kNone ? 0 : basin.epochs));
  std::vector<std::string> failures;
  auto done = [&](const MemberSpec& spec, const StatusOr<MemberResult>& r) {
    Status st = r.status();
    if (st.ok()) {
      StatusOr<std::string> job_dir = dir.JobDir(spec.index);
      st = job_dir.ok() ? WriteFileAtomic(job_dir.value() + "/result.pb",
                                          EncodeJobResult(r.value(), widths, in.data.hash, in.config_hash))
                        : job_dir.status();
    }
    if (!st.ok()) failures.push_back("member " + std::to_string(spec.index) + ": " + st.ToString());
    dir.LogEvent(st.ok() ? "member_finished" : "member_failed",
                 {{"member", spec.index}, {"cause", st.ok() ? "" : st.ToString()}});
    printer.OnMemberDone(spec.index, st);
  };
  TrainMembersLocally(specs, in.data, in.config.compute.threads,
                      [&](const EpochProgress& p) { printer.OnEpoch(p); }, done);
  printer.Finish();
  return failures;
}

struct TrainingOutcome {
  std::vector<std::string> failures;  // "member i: cause"
  WorkersSeen workers;
};

// Trains what is not finished, in process or on workers.
StatusOr<TrainingOutcome> TrainMembers(const Inputs& in, RunDirectory& dir) {
  const std::vector<bool> finished = FinishedOnDisk(dir, in, in.config.ensemble.members);
  int kept = 0;
  for (bool f : finished) kept += f;
  dir.LogEvent("training_started", {{"members", in.config.ensemble.members}, {"already_finished", kept}});
  if (InProcess(in.config)) {
    const unsigned threads = in.config.compute.threads > 0 ? in.config.compute.threads
                                                           : std::thread::hardware_concurrency();
    return TrainingOutcome{TrainInProcess(in, dir, finished),
                           {{"in-process (" + std::to_string(threads) + " threads)", HostName()}}};
  }
  CHORUS_ASSIGN_OR_RETURN(ClusterOutcome run, RunJobsOnWorkers({&in.config, &in.data, in.config_hash,
                                                                PlanMembers(in.config), finished}, dir));
  TrainingOutcome outcome{{}, run.workers};
  for (size_t i = 0; i < run.jobs.size(); ++i) {
    if (run.jobs[i].state == JobState::kFailed) {
      outcome.failures.push_back("member " + std::to_string(i) + ": " + run.jobs[i].cause);
    }
  }
  return outcome;
}

// Every finished member's result, read back from disk, in member order.
StatusOr<std::vector<MemberResult>> LoadResults(const RunDirectory& dir, const Inputs& in) {
  std::vector<MemberResult> members;
  for (int i = 0; i < in.config.ensemble.members; ++i) {
    const std::string path = dir.path() + "/jobs/" + std::to_string(i) + "/result.pb";
    if (!std::filesystem::exists(path)) continue;
    CHORUS_ASSIGN_OR_RETURN(std::string bytes, ReadFileToString(path));
    CHORUS_ASSIGN_OR_RETURN(MemberResult r, DecodeJobResult(bytes, path, in.data.hash, in.config_hash));
    members.push_back(std::move(r));
  }
  return members;
}

int Fail(RunDirectory& dir, const Inputs& in, const Status& st, double seconds) {
  LogPrintf(stderr, LogLevel::kError, "chorus run: %s", st.ToString().c_str());
  dir.LogEvent("run_failed", {{"cause", st.ToString()}});
  WriteFileAtomic(dir.File("manifest.json"), Manifest(in, "failed", st.ToString(), seconds).dump(2));
  LogPrintf(stderr, LogLevel::kError, "run directory (failed): %s", dir.path().c_str());
  return st.ExitCode();
}

StatusOr<RunDirectory> OpenOrCreate(const RunOptions& options, const Inputs& in) {
  if (options.resume_dir.empty()) {
    CHORUS_ASSIGN_OR_RETURN(RunDirectory dir, RunDirectory::Create(in.config.run.out_dir, in.config.run.name));
    CHORUS_RETURN_IF_ERROR(WriteFileAtomic(dir.File("config.yaml"), ConfigToYaml(in.config)));
    CHORUS_RETURN_IF_ERROR(WriteFileAtomic(dir.File("manifest.json"), Manifest(in, "running", "", 0).dump(2)));
    return dir;
  }
  CHORUS_ASSIGN_OR_RETURN(RunDirectory dir, RunDirectory::Open(options.resume_dir));
  CHORUS_RETURN_IF_ERROR(CheckResumable(dir, in));
  dir.LogEvent("run_resumed");
  return dir;
}

// Assembles, reports and writes the closing files of a run whose members are on disk.
int Finish(RunDirectory& dir, const Inputs& in, const TrainingOutcome& trained, double seconds) {
  const std::vector<std::string>& failures = trained.failures;
  for (const std::string& f : failures) LogPrintf(stderr, LogLevel::kError, "failed: %s", f.c_str());
  StatusOr<std::vector<MemberResult>> loaded = LoadResults(dir, in);
  if (!loaded.ok()) return Fail(dir, in, loaded.status(), seconds);
  std::vector<MemberResult>& members = loaded.value();
  if (static_cast<int>(members.size()) < in.config.ensemble.min_members || members.empty()) {
    return Fail(dir, in, Status::Refused(std::to_string(members.size()) + " members finished, fewer than min_members = " +
                                         std::to_string(in.config.ensemble.min_members)), seconds);
  }
  // The config as assembled: with basin.scale: tune, the scale chosen on validation.
  Config assembled = in.config;
  if (assembled.ensemble.basin.method != BasinMethod::kNone && assembled.ensemble.basin.tune_scale) {
    assembled.ensemble.basin.scale = TuneBasinScale(in.data, NetworkFor(in.config.model, in.data), members);
    dir.LogEvent("basin_scale_tuned", {{"scale", assembled.ensemble.basin.scale}});
  }
  const EnsembleEvaluation ev = EvaluateEnsemble(in.data, members, assembled.ensemble, in.config.report,
                                                 in.config.run.seed,
                                                 in.true_probabilities ? &*in.true_probabilities : nullptr);
  const RunFacts facts{in.config.run.name, in.data.hash, in.config_hash, in.config.ensemble.members,
                       failures, seconds};
  json report = ReportJson(ev, in.data, facts);
  if (assembled.ensemble.basin.method != BasinMethod::kNone) report["basin_scale"] = assembled.ensemble.basin.scale;
  // The manifest first: the report copies it (workers, version) into report.json and the page.
  Status st = WriteFileAtomic(dir.File("manifest.json"),
                              Manifest(in, "complete", "", seconds, trained.workers).dump(2));
  if (st.ok()) st = WriteReportFiles(dir.path(), report);
  if (st.ok()) {
    st = WriteRunBundle(dir.File("bundle.chorus"), assembled, in.data, members, ev, in.config_hash);
  }
  if (!st.ok()) return Fail(dir, in, st, seconds);
  dir.LogEvent("run_finished", {{"members", members.size()}});
  std::printf("%s\nrun directory: %s\n", SummaryTable(ev).c_str(), dir.path().c_str());
  return 0;
}

}  // namespace

int RunCommand(const RunOptions& options) {
  const auto start = std::chrono::steady_clock::now();
  auto seconds = [&] { return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(); };
  StatusOr<Inputs> loaded = LoadInputs(options);
  if (!loaded.ok()) {
    LogPrintf(stderr, LogLevel::kError, "chorus run: %s", loaded.status().ToString().c_str());
    return loaded.status().ExitCode();
  }
  const Inputs& in = loaded.value();
  StatusOr<RunDirectory> opened = OpenOrCreate(options, in);
  if (!opened.ok()) {
    LogPrintf(stderr, LogLevel::kError, "chorus run: %s", opened.status().ToString().c_str());
    return opened.status().ExitCode();
  }
  RunDirectory& dir = opened.value();
  LogLine(stderr, LogLevel::kInfo, "run directory: " + dir.path(), {{"run_dir", dir.path()}});
  LogPrintf(stderr, LogLevel::kInfo, "data: %lld train, %lld validation, %lld test rows; %lld features",
            static_cast<long long>(in.data.train.rows()), static_cast<long long>(in.data.validation.rows()),
            static_cast<long long>(in.data.test.rows()), static_cast<long long>(in.data.features()));
  StatusOr<TrainingOutcome> trained = TrainMembers(in, dir);
  if (!trained.ok()) return Fail(dir, in, trained.status(), seconds());
  return Finish(dir, in, trained.value(), seconds());
}

}  // namespace chorus

#include "coordinator/run_command.h"

#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <thread>

#include <nlohmann/json.hpp>

#include "common/file_util.h"
#include "common/gemm.h"
#include "common/rng.h"
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
  CHORUS_ASSIGN_OR_RETURN(in.config, LoadConfigFile(options.config_path));
  if (!options.out_dir.empty()) in.config.run.out_dir = options.out_dir;
  if (options.threads >= 0) in.config.compute.threads = options.threads;
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

std::string HostName() {
  char buf[256] = {};
  gethostname(buf, sizeof buf - 1);
  return buf;
}

json Manifest(const Inputs& in, const std::string& status, const std::string& cause, double seconds) {
  json seeds = json::array();
  for (const MemberSpec& s : PlanMembers(in.config)) seeds.push_back(std::to_string(s.seed));
  const unsigned cores = std::thread::hardware_concurrency();
  return {{"status", status}, {"cause", cause}, {"chorus_version", CHORUS_VERSION},
          {"config_hash", in.config_hash}, {"data_hash", in.data.hash},
          {"run_seed", std::to_string(in.config.run.seed)}, {"member_seeds", seeds},
          {"wall_seconds", seconds}, {"gemm_backend", GemmBackendName()},
          {"workers", {{{"host", HostName()}, {"kind", "in-process"},
                        {"threads", in.config.compute.threads > 0 ? in.config.compute.threads
                                                                  : static_cast<int>(cores)}}}}};
}

// Trains all members, storing each result under jobs/<index>/ as it finishes.
std::vector<MemberResult> TrainAll(const Inputs& in, RunDirectory& dir, std::vector<std::string>& failures) {
  const std::vector<MemberSpec> specs = PlanMembers(in.config);
  const std::vector<int> widths = NetworkFor(in.config.model, in.data).widths();
  const BasinConfig& basin = in.config.ensemble.basin;
  ProgressPrinter printer(stderr, in.config.ensemble.members,
                          in.config.train.epochs + (basin.method == BasinMethod::kNone ? 0 : basin.epochs));
  auto done = [&](const MemberSpec& spec, const StatusOr<MemberResult>& r) {
    Status st = r.status();
    if (st.ok()) {
      StatusOr<std::string> job_dir = dir.JobDir(spec.index);
      st = job_dir.ok() ? WriteFileAtomic(job_dir.value() + "/result.pb",
                                          EncodeJobResult(r.value(), widths, in.data.hash, in.config_hash))
                        : job_dir.status();
    }
    dir.LogEvent(st.ok() ? "member_finished" : "member_failed",
                 {{"member", spec.index}, {"cause", st.ok() ? "" : st.ToString()}});
    printer.OnMemberDone(spec.index, st);
  };
  dir.LogEvent("training_started", {{"members", specs.size()}});
  auto results = TrainMembersLocally(specs, in.data, in.config.compute.threads,
                                     [&](const EpochProgress& p) { printer.OnEpoch(p); }, done);
  printer.Finish();
  std::vector<MemberResult> finished;
  for (size_t i = 0; i < results.size(); ++i) {
    if (results[i].ok()) finished.push_back(std::move(results[i]).value());
    else failures.push_back("member " + std::to_string(i) + ": " + results[i].status().ToString());
  }
  return finished;
}

int Fail(RunDirectory& dir, const Inputs& in, const Status& st, double seconds) {
  std::fprintf(stderr, "chorus run: %s\n", st.ToString().c_str());
  dir.LogEvent("run_failed", {{"cause", st.ToString()}});
  WriteFileAtomic(dir.File("manifest.json"), Manifest(in, "failed", st.ToString(), seconds).dump(2));
  std::fprintf(stderr, "run directory (failed): %s\n", dir.path().c_str());
  return st.ExitCode();
}

}  // namespace

int RunCommand(const RunOptions& options) {
  const auto start = std::chrono::steady_clock::now();
  auto seconds = [&] { return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(); };
  StatusOr<Inputs> loaded = LoadInputs(options);
  if (!loaded.ok()) {
    std::fprintf(stderr, "chorus run: %s\n", loaded.status().ToString().c_str());
    return loaded.status().ExitCode();
  }
  const Inputs& in = loaded.value();
  StatusOr<RunDirectory> created = RunDirectory::Create(in.config.run.out_dir, in.config.run.name);
  if (!created.ok()) {
    std::fprintf(stderr, "chorus run: %s\n", created.status().ToString().c_str());
    return created.status().ExitCode();
  }
  RunDirectory& dir = created.value();
  Status st = WriteFileAtomic(dir.File("config.yaml"), ConfigToYaml(in.config));
  if (!st.ok()) return Fail(dir, in, st, seconds());
  std::fprintf(stderr, "run directory: %s\ndata: %lld train, %lld validation, %lld test rows; %lld features\n",
               dir.path().c_str(), static_cast<long long>(in.data.train.rows()),
               static_cast<long long>(in.data.validation.rows()),
               static_cast<long long>(in.data.test.rows()), static_cast<long long>(in.data.features()));
  std::vector<std::string> failures;
  const std::vector<MemberResult> members = TrainAll(in, dir, failures);
  if (static_cast<int>(members.size()) < in.config.ensemble.min_members) {
    return Fail(dir, in, Status::Refused(std::to_string(members.size()) + " members finished, fewer than min_members = " +
                                         std::to_string(in.config.ensemble.min_members)), seconds());
  }
  const EnsembleEvaluation ev = EvaluateEnsemble(
      in.data, members, in.config.ensemble, in.config.report, in.config.run.seed,
      in.true_probabilities ? &*in.true_probabilities : nullptr);
  const RunFacts facts{in.config.run.name, in.data.hash, in.config_hash, in.config.ensemble.members,
                       failures, seconds()};
  const json report = ReportJson(ev, in.data, facts);
  st = WriteFileAtomic(dir.File("report.html"), ReportHtml(report));
  if (st.ok()) st = WriteFileAtomic(dir.File("report.json"), report.dump(2) + "\n");
  if (st.ok()) st = WriteFileAtomic(dir.File("manifest.json"), Manifest(in, "complete", "", seconds()).dump(2));
  if (!st.ok()) return Fail(dir, in, st, seconds());
  dir.LogEvent("run_finished", {{"members", members.size()}});
  std::printf("%s\nrun directory: %s\n", SummaryTable(ev).c_str(), dir.path().c_str());
  return 0;
}

}  // namespace chorus

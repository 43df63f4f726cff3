#include "coordinator/run_command.h"

#include <tbb/task_arena.h>

#include <cstdio>
#include <filesystem>
#include <thread>
#include <utility>

#include <nlohmann/json.hpp>

#include "common/basin_scale.h"
#include "common/dataset.h"
#include "common/evaluation.h"
#include "common/file_util.h"
#include "common/host_name.h"
#include "common/gemm.h"
#include "common/host_memory.h"
#include "common/log_format.h"
#include "common/memory_estimate.h"
#include "common/rng.h"
#include "common/training_summary.h"
#include "common/true_probabilities.h"
#include "coordinator/bundle_writer.h"
#include "common/folds.h"
#include "coordinator/job_runner.h"
#include "coordinator/run_stages.h"
#include "coordinator/shift_evaluation.h"
#include "coordinator/method_facts.h"
#include "coordinator/training_facts.h"
#include "coordinator/guard_data.h"
#include "coordinator/warm_start.h"
#include "coordinator/config_loader.h"
#include "coordinator/report_files.h"
#include "coordinator/run_directory.h"
#include "coordinator/run_phases.h"
#include "report/report_model.h"
#include "coordinator/terminal.h"
#include "execution/tbb_parallel_for.h"

namespace chorus {
namespace {

using nlohmann::json;

struct Inputs {
  Config config;
  PreparedData data;
  std::optional<Matrix> true_probabilities;
  std::optional<Matrix> shifted;  // data.shift_test's rows, standardised
  std::optional<WarmStart> warm_start;  // train.warm_start's bundle and starting points
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
  CHORUS_RETURN_IF_ERROR(CheckModelForData(in.config.model, in.data.features(), path + ": model.image"));
  if (!in.config.data.true_probabilities.empty()) {
    CHORUS_ASSIGN_OR_RETURN(in.true_probabilities,
                            LoadTrueProbabilities(in.config.data.true_probabilities, in.data));
  }
  if (!in.config.data.shift_test.empty()) {
    CHORUS_ASSIGN_OR_RETURN(in.shifted, LoadShiftedRows(in.config.data, in.data));
  }
  if (!in.config.train.warm_start.empty()) {
    CHORUS_ASSIGN_OR_RETURN(in.warm_start, LoadWarmStart(in.config, in.data));
  }
  if (in.warm_start) {
    TrainConfig& t = in.config.train;
    if (t.warm_epochs > 0) t.epochs = t.warm_epochs;
    t.start_points = in.warm_start->points;
    LogLine(stderr, LogLevel::kInfo,
            "warm start from " + in.warm_start->path + " (run " + in.warm_start->bundle.run_name +
                ", " + std::to_string(in.warm_start->bundle.members.size()) + " members), " +
                std::to_string(t.epochs) + " epochs",
            {{"warm_start", in.warm_start->path}, {"warm_start_sha256", in.warm_start->sha256}});
  } else if (!in.config.train.warm_start.empty()) {
    LogLine(stderr, LogLevel::kInfo,
            "warm start: " + in.config.train.warm_start +
                " has no current bundle yet; training from scratch",
            {{"warm_start", "none"}});
  }
  // After the warm epochs are applied, so a resume (which reads them back) hashes the same.
  in.config_hash = ConfigHash(in.config);
  if (in.warm_start) in.config_hash = WarmStartConfigHash(in.config_hash, *in.warm_start);
  return in;
}

// Refuses, before anything is written, a run whose estimated memory exceeds what this process
// may use; the estimate against the limit otherwise.
StatusOr<std::pair<MemoryEstimate, MemoryLimit>> CheckMemory(const Inputs& in, bool refuse) {
  const MemoryEstimate need = EstimateRunMemory(in.config, in.data, JobsAtOnceOnThisMachine(in.config));
  const MemoryLimit have = UsableMemory();
  if (!refuse || need.Total() <= have.bytes) return std::make_pair(need, have);
  return Status::InvalidInput(
      "the run needs an estimated " + need.Breakdown() + ", more than the " + ByteText(have.bytes) +
      " this machine allows (" + have.source + "); train fewer members at once (compute.threads, "
      "cluster.local_workers), or use smaller model.hidden, ensemble.basin.rank or samples, or more "
      "remote workers; --no-memory-check runs it anyway");
}

json Manifest(const Inputs& in, const std::string& status, const std::string& cause, double seconds,
              const WorkersSeen& workers = {}) {
  json seen = json::array();
  for (const auto& [id, host] : workers) seen.push_back({{"id", id}, {"host", host}});
  json seeds = json::array();
  for (int i = 0; i < in.config.ensemble.members; ++i) {
    seeds.push_back(std::to_string(Derive(in.config.run.seed, static_cast<uint64_t>(i))));
  }
  const unsigned cores = std::thread::hardware_concurrency();
  return {{"status", status}, {"cause", cause}, {"chorus_version", CHORUS_VERSION},
          {"config_hash", in.config_hash}, {"data_hash", in.data.hash},
          {"run_seed", std::to_string(in.config.run.seed)}, {"member_seeds", seeds},
          {"wall_seconds", seconds}, {"gemm_backend", GemmBackendName(in.config.train.products)},
          {"coordinator", {{"host", HostName()}, {"cores", cores},
                           {"mode", TrainsInProcess(in.config) ? "in-process" : "workers"}}},
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

// Basin-fit scale tuning (basin.scale: tune) on validation, out of fold when cross-fitting;
// rewrites the members' sample outputs and returns the config with the chosen scale.
Config TuneScale(const Inputs& in, TrainedRun& trained, RunDirectory& dir) {
  Config assembled = trained.chosen;
  BasinConfig& basin = assembled.ensemble.basin;
  if (basin.method == BasinMethod::kNone || !basin.tune_scale) return assembled;
  const Mlp net = NetworkFor(assembled.model, in.data);
  if (in.data.folds == 0) {
    basin.scale = TuneBasinScale(in.data, net, trained.members);
  } else {
    std::vector<std::vector<const MemberResult*>> folds;
    for (const std::vector<MemberResult>& f : trained.member_folds) {
      folds.emplace_back();
      for (const MemberResult& r : f) folds.back().push_back(&r);
    }
    basin.scale = TuneBasinScaleOutOfFold(in.data, net, trained.fold_of_row, folds, trained.members);
  }
  dir.LogEvent("basin_scale_tuned", {{"scale", basin.scale}});
  return assembled;
}

// The warm-start bundle scored on this run's test split (the raw rows, encoded with the bundle's
// own preprocessing, as chorus promote scores it) beside this run's ensemble.
StatusOr<json> WarmStartComparison(const Inputs& in, const EnsembleEvaluation& ev) {
  CHORUS_ASSIGN_OR_RETURN(const GuardData test, LoadGuardData(in.config, GuardSource()));
  StatusOr<GateMetrics> start = ScoreOnGuard(in.warm_start->bundle, test, in.config.compute.threads);
  if (!start.ok()) return start.status().WithContext("scoring the warm-start bundle");
  json j = WarmStartJson(*in.warm_start);
  j["start_bundle_test"] = GateMetricsJson(in.data.task, start.value());
  const double nll = in.data.task == Task::kClassification ? ev.test.classification.nll
                                                           : ev.test.regression.nll;
  j["nll_change"] = nll - start.value().nll;
  LogPrintf(stderr, LogLevel::kInfo,
            "warm start: the starting bundle's test NLL %.4f, this run's ensemble %.4f",
            start.value().nll, nll);
  return j;
}

// Assembles, reports and writes the closing files of a run whose members have trained.
// Each step's wall time goes into `phases`, which report.json keeps.
int Finish(RunDirectory& dir, const Inputs& in, TrainedRun& trained, const WorkersSeen& workers,
           RunPhases& phases) {
  const double seconds = phases.Seconds();  // to the end of training
  const std::vector<std::string>& failures = trained.failures;
  for (const std::string& f : failures) LogPrintf(stderr, LogLevel::kError, "failed: %s", f.c_str());
  std::vector<MemberResult>& members = trained.members;
  if (static_cast<int>(members.size()) < in.config.ensemble.min_members || members.empty()) {
    return Fail(dir, in, Status::Refused(std::to_string(members.size()) + " members finished, fewer than min_members = " +
                                         std::to_string(in.config.ensemble.min_members)), seconds);
  }
  // The config as assembled: the search's point, and with basin.scale: tune the chosen scale.
  const Config assembled = TuneScale(in, trained, dir);
  if (assembled.ensemble.basin.tune_scale && assembled.ensemble.basin.method != BasinMethod::kNone) {
    phases.End("basin scale tuning");
  }
  // Cross-fitting: assembly sees every training row as validation, out of fold.
  const std::optional<PreparedData> out_of_fold =
      in.data.folds > 0 ? std::optional<PreparedData>(OutOfFoldView(in.data)) : std::nullopt;
  const PreparedData& assembly_data = out_of_fold ? *out_of_fold : in.data;
  // The size grid's subsets are scored on as many threads as members trained at once.
  tbb::task_arena arena(in.config.compute.threads > 0 ? in.config.compute.threads
                                                      : tbb::task_arena::automatic);
  const TbbParallelFor parallel;
  EnsembleEvaluation ev;
  arena.execute([&] {
    ev = EvaluateEnsemble(assembly_data, members, assembled.ensemble, in.config.report, in.config.run.seed,
                          in.true_probabilities ? &*in.true_probabilities : nullptr, &parallel);
  });
  phases.Part("size grid", ev.size_curve_seconds);
  phases.End("weights, temperature and test scores");
  const RunFacts facts{in.config.run.name, in.data.hash, in.config_hash, in.config.ensemble.members,
                       failures, seconds};
  const BaselineEvaluation baseline = EvaluateBaseline(in.data, trained.fold_of_row,
                                                       assembled.ensemble.tune_temperature, in.config.report.ece_bins);
  phases.End("linear baseline");
  json report = ReportJson(ev, in.data, facts);
  report["baseline"] = BaselineJson(ev, baseline);
  if (in.shifted) {
    report["shift"] = ShiftJson(EvaluateShift(assembled, in.data, members, ev, *in.shifted));
    phases.End("shift test");
  }
  AddTrainingFacts(assembled, in.data, trained, report);
  AddCosts(dir, members, in.config.report.nll_tolerance, report);
  AddProbitScores(assembled, in.data, members, ev.weights, report);
  phases.End("report facts");
  if (in.warm_start) {
    StatusOr<json> warm = WarmStartComparison(in, ev);
    if (!warm.ok()) return Fail(dir, in, warm.status(), phases.Seconds());
    report["warm_start"] = warm.value();
    phases.End("warm start comparison");
  }
  TrainingSummary summary;
  arena.execute([&] { summary = SummarizeTraining(in.data, &parallel); });
  phases.End("training data summary");
  // The phases up to here; the manifest before the report, which copies it (workers, version)
  // into report.json and the page; the bundle last, so a run that fails leaves none. Writing the
  // report and the bundle (well under a second on Fashion-MNIST) is the time left out.
  report["phases"] = phases.Json();
  Status st = WriteFileAtomic(dir.File("manifest.json"), Manifest(in, "complete", "", phases.Seconds(), workers).dump(2));
  if (st.ok()) st = WriteReportFiles(dir.path(), report);
  if (st.ok()) st = WriteRunBundle(dir.File("bundle.chorus"), assembled, in.data, members, ev, in.config_hash,
                                   summary);
  if (!st.ok()) return Fail(dir, in, st, phases.Seconds());
  dir.LogEvent("run_finished", {{"members", members.size()}});
  std::printf("%s\nrun directory: %s\n", SummaryTable(ev, &baseline).c_str(), dir.path().c_str());
  return 0;
}

}  // namespace

int RunCommand(const RunOptions& options) {
  RunPhases phases;
  StatusOr<Inputs> loaded = LoadInputs(options);
  if (!loaded.ok()) {
    LogPrintf(stderr, LogLevel::kError, "chorus run: %s", loaded.status().ToString().c_str());
    return loaded.status().ExitCode();
  }
  const Inputs& in = loaded.value();
  const StatusOr<std::pair<MemoryEstimate, MemoryLimit>> memory = CheckMemory(in, !options.skip_memory_check);
  if (!memory.ok()) {
    LogPrintf(stderr, LogLevel::kError, "chorus run: %s", memory.status().ToString().c_str());
    return memory.status().ExitCode();
  }
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
  const auto& [need, have] = memory.value();
  LogLine(stderr, LogLevel::kInfo, "memory: estimated " + need.Breakdown() + "; usable " + ByteText(have.bytes),
          {{"estimated_bytes", need.Total()}, {"usable_bytes", have.bytes}});
  if (in.config.train.products == ProductPrecision::kBf16 && !Bf16ProductsAvailable()) {
    LogLine(stderr, LogLevel::kWarning,
            "train.products: bf16: this CPU has no AVX512_BF16, so members trained here use fp32 "
            "products (results differ from a bf16 machine's)",
            {{"products", "fp32"}});
  }
  phases.End("config, data and run directory");
  std::unique_ptr<JobRunner> runner = MakeJobRunner({&in.config, &in.data, in.config_hash}, dir);
  StatusOr<TrainedRun> trained = TrainRun(in.config, in.data, in.config_hash, dir, *runner);
  runner->Close();
  phases.End("training jobs");
  if (!trained.ok()) return Fail(dir, in, trained.status(), phases.Seconds());
  return Finish(dir, in, trained.value(), runner->Workers(), phases);
}

}  // namespace chorus

// chorus-bench-many-workers: what one coordinator costs, in CPU and memory, when many workers
// drive a long run of short jobs through it; and from that, its overhead beside the workers'
// compute when jobs take a minute each.
//
// The coordinator is the real CoordinatorService (chorus run's limits, max_attempts 3, 30 s
// leases, its 4 MiB message bound, events.jsonl and jobs/<i>/result.pb in a scratch run
// directory) with chorus run's supervision beside it (expiring leases every 50 ms, the progress
// view every second, here drawn to /dev/null), serving J one-epoch jobs of an 8-16-2 network
// over a Philox-drawn data set (1,000/200/200 rows x 8 features, 2 classes). It runs in a child
// process (this executable with --serve) listening on 127.0.0.1 with an ephemeral port, so its
// CPU and memory are its own: the child reads getrusage(RUSAGE_SELF) (user + system time of all
// its threads, live or ended) and VmHWM from /proc/self/status when told the run is over. The
// simulated workers' CPU is spent in this (the parent) process and never counted. Caveat: on
// loopback the kernel delivers a packet in the sender's context, so part of the network stack's
// work on each side is charged to the other; on a real network the coordinator pays for its own
// receives. The run directory goes under --scratch, /dev/shm by default: on a disk mounted with
// online discard (this machine's) deleting 100,000 job directories takes minutes; a run with
// --scratch on a disk adds the file system's CPU (1000 x 10,000: 2.1 instead of 1.5 ms a job).
//
// W simulated workers each have their own channel and TCP connection (as on W machines), register
// once, then in turn: Lease (timed); on a job, the data from their own cache, fetched by hash
// (FetchData) the first time only; H heartbeats; then the job's result uploaded as a worker does
// (CoordinatorClient::UploadJobResult: SHA-256 and size, then 1 MiB chunks into the stream). The
// result is one member of the bench data trained once at start-up (TrainMember), relabelled
// with each job's index and seed: valid bytes the coordinator decodes, checks and stores as the
// job's result.
// A worker told WAIT asks again after the retry delay; told DONE, it stops. The coordinator's
// table must then count J finished jobs, or the bench fails.
// The workers are multiplexed onto T threads (default 16), each running the workers i = t mod T
// one job at a time. One OS thread per worker would mostly measure this process's scheduler on a
// 2-core machine and would delay Lease replies by its own run queue; T calls in flight (T >= 8
// per coordinator core) already keep the coordinator busy, while every worker still holds its
// own connection and registration, which is what a worker costs the coordinator. T <= 64 keeps
// uploads within the coordinator's 64 upload slots. Lease latency is therefore that of a
// saturated coordinator with T calls in flight, not of a quiet one.
// H defaults to 6: a worker renews its lease every lease_seconds / 3 = 10 s (worker/worker_loop.cc),
// so a one-minute job sends 6 heartbeats, and the measured CPU per job is that of such a job.
//
// Sizes (each its own coordinator process): workers W/4, W/2 and W at max(J/50, W) jobs; jobs
// J/10 and J at W workers (with the W run before). Memory per worker is the least-squares slope
// of VmHWM over the first three, memory per job over the W-worker runs. --single runs only W x J.
// Usage: chorus-bench-many-workers [--workers W (1000)] [--jobs J (100000)] [--threads T (16)]
//          [--heartbeats H (6)] [--scratch DIR (/dev/shm)] [--single] [--quick (W=50, J=2000)]
// Output: one "machine:" line (and "env: OPENBLAS_CORETYPE=..." when set), then per size
//   many_workers workers=W jobs=J threads=T heartbeats=H wall_s=.. jobs_per_s=..
//     startup_cpu_s=.. coordinator_cpu_s=.. cpu_per_job_ms=.. ready_rss_mib=.. hwm_mib=..
//     lease_p50_ms=.. lease_p99_ms=.. fetches=N fetch_bytes=B data_bytes=D uploads=U waits=N
//     errors=E
// where coordinator_cpu_s is the coordinator's CPU from ready (jobs queued, listening) to the end
// and ready_rss_mib its resident memory then; then
//   many_workers fit memory_per_job_kib=.. base_mib=.. (..) memory_per_worker_kib=.. base_mib=.. (..)
//   many_workers overhead job_seconds=60 cpu_per_job_ms=.. overhead_percent=.. target_percent=1
//     target_met=yes|no
//
// Measured on the 2-core development machine, quiet (loadavg 0.02 at the start), defaults:
//   1000 x 100,000: 106 s, 940 jobs/s, coordinator 105.5 CPU-s = 1.06 ms a job, VmHWM 129 MiB
//     (64 MiB at ready), lease p50 2.1 ms, p99 8.4 ms; 1000 fetches, 46.4 MB (46,385 B each);
//     0 errors. 1000 x 10,000: 0.84 ms a job; 1000 x 2,000: 0.98 ms; 250 x 2,000: 0.64 ms.
//   Fits: 0.81 KiB per job, 24.9 KiB per worker. Overhead for one-minute jobs 0.0018% (< 1%).
//   Before JobTable::IsFinished, the upload path copied the whole job table per result: 6.98 ms
//   a job and 530 MiB at 1000 x 100,000 (the run's cost grew with the square of its size).
#include <CLI/CLI.hpp>
#include <grpcpp/grpcpp.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <initializer_list>
#include <map>
#include <memory>
#include <optional>
#include <string_view>
#include <thread>
#include <vector>

#include "bench/service_bench.h"
#include "common/data_hash.h"
#include "common/rng.h"
#include "coordinator/coordinator_service.h"
#include "coordinator/progress_view.h"
#include "proto/data_codec.h"
#include "proto/spec_codec.h"
#include "worker/coordinator_client.h"

namespace chorus {
namespace {

using BenchClock = std::chrono::steady_clock;

constexpr char kToken[] = "many-workers-bench-token-5d08c3e1";
constexpr char kConfigHash[] = "many-workers-bench-config";
constexpr double kLeaseSeconds = 30;  // chorus run's default lease
constexpr int kMaxAttempts = 3;       // chorus run's default
constexpr double kJobSeconds = 60;    // the job length the overhead is stated for

constexpr int64_t kMaxFetchBytes = int64_t{1} << 30;  // the bench data set is 46 KB

[[noreturn]] void Die(const std::string& why) {
  std::fprintf(stderr, "chorus-bench-many-workers: %s\n", why.c_str());
  std::exit(1);
}

double Seconds(BenchClock::duration d) { return std::chrono::duration<double>(d).count(); }

// The data every job trains on: 8 standard normal features, label x0 + x1 > 0, drawn from one
// Philox stream, so the coordinator and the workers build the same set (and hash).
PreparedData BenchData() {
  PreparedData data;
  data.feature_names = {"f0", "f1", "f2", "f3", "f4", "f5", "f6", "f7"};
  data.class_names = {"negative", "positive"};
  Philox rng(Derive(2024, "many-workers-data"));
  const std::initializer_list<std::pair<Split*, int>> splits = {
      {&data.train, 1000}, {&data.validation, 200}, {&data.test, 200}};
  for (const auto& [split, rows] : splits) {
    split->x.resize(rows, 8);
    for (int r = 0; r < rows; ++r) {
      for (int c = 0; c < 8; ++c) split->x(r, c) = static_cast<float>(rng.NextNormal());
      split->labels.push_back(split->x(r, 0) + split->x(r, 1) > 0 ? 1 : 0);
    }
  }
  data.hash = DataHash(data);
  return data;
}

// `jobs` one-epoch members of an 8-16-2 network, member i seeded with i.
std::vector<MemberSpec> BenchSpecs(int jobs) {
  std::vector<MemberSpec> specs = bench::TinySpecs(jobs);
  for (MemberSpec& s : specs) s.model.hidden = {16};
  return specs;
}

// ---- The coordinator's process (--serve) ----

double ProcessCpuSeconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  const auto secs = [](const timeval& t) { return static_cast<double>(t.tv_sec) + t.tv_usec * 1e-6; };
  return secs(u.ru_utime) + secs(u.ru_stime);
}

// A "Vm...:" figure of /proc/self/status, in KiB.
long StatusKib(const std::string& key) {
  std::ifstream in("/proc/self/status");
  for (std::string line; std::getline(in, line);) {
    if (line.rfind(key, 0) == 0) return std::atol(line.c_str() + key.size());
  }
  return -1;
}

// A fresh directory under `parent` for the run directory.
std::string ScratchDir(const std::string& parent) {
  std::string path = (std::filesystem::path(parent) / "chorus-bench-XXXXXX").string();
  if (mkdtemp(path.data()) == nullptr) Die("mkdtemp failed");
  return path;
}

// What chorus run's coordinator does beside serving (coordinator/cluster_run.cc Supervise), until
// every job is settled: every 50 ms, re-queues expired leases (with their events); every second,
// updates the progress view (here drawn to /dev/null) from the table and the workers.
void Supervise(JobTable& table, const CoordinatorService& service, RunDirectory& dir) {
  FILE* null = std::fopen("/dev/null", "w");
  if (null == nullptr) Die("cannot open /dev/null");
  ProgressView view(null, table.Count(JobState::kQueued));
  auto last_draw = Clock::now() - std::chrono::seconds(1);
  while (!table.AllSettled()) {
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    for (const ExpiredLease& e : table.ExpireLeases(Clock::now())) {
      const MemberSpec spec = service.Spec(e.job);
      if (e.failed) {
        dir.LogJobEvent(spec, true, {{"worker", e.worker}, {"cause", "lease expired too often"}});
      } else {
        dir.LogEvent("lease_expired", {{"member", spec.index}, {"job", JobName(spec)}, {"worker", e.worker}});
      }
    }
    if (Clock::now() - last_draw >= std::chrono::seconds(1)) {
      view.Update(table.Snapshot(), service.Workers());
      last_draw = Clock::now();
    }
  }
  view.Finish(table.Snapshot());
  std::fclose(null);
}

// Serves `jobs` jobs as chorus run's coordinator does, its run directory under `scratch`. On
// stdout: "ready port=.. cpu_s=.. rss_kib=.. data_bytes=..", then, once a line arrives on stdin
// (the run is over), "served cpu_s=.. hwm_kib=.. finished=..". False if stdin closed first (the
// bench went away).
bool ServeIn(const std::string& scratch, int jobs) {
  StatusOr<RunDirectory> made = RunDirectory::Create(scratch, "many-workers");
  if (!made.ok()) Die(made.status().ToString());
  RunDirectory dir = std::move(made).value();
  JobTable table(0, kMaxAttempts, kLeaseSeconds);
  const PreparedData data = BenchData();
  const std::string data_bytes = EncodePreparedData(data);
  CoordinatorService service(
      DispatchInputs{data_bytes, data.hash, kConfigHash, kLeaseSeconds, kToken, ServiceLimits{}}, &table, &dir);
  service.AddJobs(BenchSpecs(jobs));
  service.Close();
  int port = 0;
  const std::unique_ptr<grpc::Server> server = bench::ServeOnLoopback(&service, &port);
  if (!server) Die("cannot listen on 127.0.0.1");
  std::printf("ready port=%d cpu_s=%.6f rss_kib=%ld data_bytes=%zu\n", port, ProcessCpuSeconds(),
              StatusKib("VmRSS:"), data_bytes.size());
  std::fflush(stdout);
  Supervise(table, service, dir);
  char line[64];
  if (std::fgets(line, sizeof line, stdin) == nullptr) return false;
  const double cpu = ProcessCpuSeconds();
  std::printf("served cpu_s=%.6f hwm_kib=%ld finished=%d\n", cpu, StatusKib("VmHWM:"),
              table.Count(JobState::kFinished));
  std::fflush(stdout);
  server->Shutdown(std::chrono::system_clock::now());
  return true;
}

// The coordinator's process (--serve): ServeIn a fresh directory under `scratch_parent`, removed
// after.
int Serve(int jobs, const std::string& scratch_parent) {
  const std::string scratch = ScratchDir(scratch_parent);
  const bool told = ServeIn(scratch, jobs);
  std::filesystem::remove_all(scratch);
  return told ? 0 : 1;
}

// The coordinator's process seen from the bench: started (and ready) on construction, told the
// run is over with Finish, which waits for it to exit.
class CoordinatorProcess {
 public:
  struct Ready {
    int port = 0;
    double cpu_s = 0;
    long rss_kib = 0;
    long data_bytes = 0;
  };
  struct Served {
    double cpu_s = 0;
    long hwm_kib = 0;
    int finished = 0;
  };

  // fork, then only dup2 and execv in the child (safe with gRPC's threads in this process).
  CoordinatorProcess(int jobs, std::string scratch_parent) {
    int to_child[2], from_child[2];
    if (pipe(to_child) != 0 || pipe(from_child) != 0) Die("pipe failed");
    std::string jobs_text = std::to_string(jobs);
    std::vector<std::string> args = {"/proc/self/exe", "--serve", "--jobs", jobs_text, "--scratch", scratch_parent};
    std::vector<char*> argv;
    for (std::string& a : args) argv.push_back(a.data());
    argv.push_back(nullptr);
    std::fflush(stdout);
    pid_ = fork();
    if (pid_ < 0) Die("fork failed");
    if (pid_ == 0) {
      dup2(to_child[0], STDIN_FILENO);
      dup2(from_child[1], STDOUT_FILENO);
      close(to_child[1]);
      close(from_child[0]);
      execv(argv[0], argv.data());
      _exit(127);
    }
    close(to_child[0]);
    close(from_child[1]);
    to_ = fdopen(to_child[1], "w");
    from_ = fdopen(from_child[0], "r");
    if (std::fscanf(from_, "ready port=%d cpu_s=%lf rss_kib=%ld data_bytes=%ld", &ready_.port, &ready_.cpu_s,
                    &ready_.rss_kib, &ready_.data_bytes) != 4) {
      Die("the coordinator's process did not start");
    }
  }

  const Ready& ready() const { return ready_; }

  Served Finish() {
    std::fputs("stop\n", to_);
    std::fflush(to_);
    Served s;
    if (std::fscanf(from_, " served cpu_s=%lf hwm_kib=%ld finished=%d", &s.cpu_s, &s.hwm_kib, &s.finished) != 3) {
      Die("the coordinator's process did not report");
    }
    std::fclose(to_);
    std::fclose(from_);
    int status = 0;
    waitpid(pid_, &status, 0);
    if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) Die("the coordinator's process failed");
    return s;
  }

 private:
  pid_t pid_ = -1;
  FILE* to_ = nullptr;
  FILE* from_ = nullptr;
  Ready ready_;
};

// ---- The simulated workers (this process) ----

// What the workers of one thread did.
struct Tally {
  std::vector<double> lease_ms;
  int64_t fetches = 0, fetch_bytes = 0, uploads = 0, waits = 0, errors = 0;
  std::string first_error;  // what the first error was, for the report

  void Error(const std::string& what) {
    if (errors++ == 0) first_error = what;
  }
  void Add(const Tally& t) {
    if (first_error.empty()) first_error = t.first_error;
    lease_ms.insert(lease_ms.end(), t.lease_ms.begin(), t.lease_ms.end());
    fetches += t.fetches, fetch_bytes += t.fetch_bytes, uploads += t.uploads;
    waits += t.waits, errors += t.errors;
  }
};

// One simulated worker: the worker's own client (worker/coordinator_client.h) with a connection
// of its own (gRPC would otherwise share one connection among all the clients of a process); its
// id; its data cache.
class SimulatedWorker {
 public:
  SimulatedWorker(const std::string& target, const MemberResult* result) : result_(result) {
    ConnectionOptions options;
    options.target = target;
    options.token = kToken;
    options.own_connection = true;
    StatusOr<std::unique_ptr<CoordinatorClient>> client = CoordinatorClient::Create(options);
    if (!client.ok()) Die("a worker cannot connect: " + client.status().ToString());
    client_ = std::move(client).value();
  }

  void Register() {
    wire::RegisterRequest req;
    req.set_host("bench-host");
    req.set_slots(1);
    req.set_pid(static_cast<int>(getpid()));
    wire::RegisterReply reply;
    if (!client_->Register(req, &reply).ok()) Die("a worker cannot register");
    id_ = reply.worker_id();
  }

  bool done() const { return done_; }
  BenchClock::time_point next_turn() const { return next_turn_; }

  // One turn: Lease; on a job, its whole life. Sets when the next turn may start.
  void Turn(int heartbeats, Tally& tally) {
    wire::LeaseRequest req;
    req.set_worker_id(id_);
    wire::LeaseReply lease;
    const auto start = BenchClock::now();
    const Status st = client_->Lease(req, &lease);
    tally.lease_ms.push_back(Seconds(BenchClock::now() - start) * 1e3);
    next_turn_ = BenchClock::now();
    if (!st.ok()) {
      tally.Error(st.ToString());
      next_turn_ += std::chrono::milliseconds(250);
    } else if (lease.kind() == wire::LeaseReply::DONE) {
      done_ = true;
    } else if (lease.kind() == wire::LeaseReply::WAIT) {
      ++tally.waits;
      next_turn_ += std::chrono::duration_cast<BenchClock::duration>(
          std::chrono::duration<double>(std::max(0.05, lease.retry_after_seconds())));
    } else {
      RunJob(lease, heartbeats, tally);
    }
  }

 private:
  void RunJob(const wire::LeaseReply& lease, int heartbeats, Tally& tally) {
    StatusOr<MemberSpec> spec = SpecFromWire(lease.spec());
    StatusOr<const PreparedData*> data = Data(lease.data_hash(), tally);
    if (!spec.ok() || !data.ok()) {
      tally.Error((spec.ok() ? data.status() : spec.status()).ToString());
      return;
    }
    for (int beat = 1; beat <= heartbeats; ++beat) {
      wire::HeartbeatRequest req;
      req.set_worker_id(id_);
      req.set_job_id(lease.job_id());
      req.set_lease_id(lease.lease_id());
      req.set_epoch(beat);
      req.set_epochs(heartbeats);
      req.set_loss(0.5);
      wire::HeartbeatReply reply;
      const Status st = client_->Heartbeat(req, &reply);
      if (!st.ok() || !reply.keep_going()) tally.Error(st.ok() ? "Heartbeat: lease gone" : st.ToString());
    }
    MemberResult result = *result_;
    result.index = spec.value().index;
    result.seed = spec.value().seed;
    const std::vector<int> widths = NetworkFor(spec.value().model, *data.value()).widths();
    wire::UploadReply reply;
    const Status uploaded = client_->UploadJobResult(id_, lease, widths, result, &reply);
    if (!uploaded.ok()) {
      tally.Error(uploaded.ToString());
    } else if (reply.outcome() != wire::UploadReply::ACCEPTED) {
      tally.Error("UploadResult: not accepted");
    } else {
      ++tally.uploads;
    }
  }

  // The data set `hash` from this worker's cache, fetched (and counted) the first time.
  StatusOr<const PreparedData*> Data(const std::string& hash, Tally& tally) {
    const auto cached = cache_.find(hash);
    if (cached != cache_.end()) return cached->second.get();
    int64_t bytes = 0;
    std::optional<PreparedData> data;
    CHORUS_RETURN_IF_ERROR(client_->FetchData(
        hash, kMaxFetchBytes,
        [&](google::protobuf::io::ZeroCopyInputStream* in) {
          StatusOr<PreparedData> decoded = DecodePreparedData(in, "fetched data", hash);
          CHORUS_RETURN_IF_ERROR(decoded.status());
          data = std::move(decoded).value();
          return Status::Ok();
        },
        [&](std::string_view piece) {
          bytes += static_cast<int64_t>(piece.size());
          return Status::Ok();
        }));
    ++tally.fetches;
    tally.fetch_bytes += bytes;
    return (cache_[hash] = std::make_unique<PreparedData>(std::move(*data))).get();
  }

  std::unique_ptr<CoordinatorClient> client_;
  const MemberResult* result_;
  std::string id_;
  std::map<std::string, std::unique_ptr<PreparedData>> cache_;
  bool done_ = false;
  BenchClock::time_point next_turn_;
};

// Runs `workers` (this thread's share) until every one is told DONE: each ready worker takes a
// turn in order; when none is ready, sleeps until the first is.
void DriveWorkers(const std::vector<SimulatedWorker*>& workers, int heartbeats, Tally& tally) {
  for (SimulatedWorker* w : workers) w->Register();
  while (true) {
    auto first_ready = BenchClock::time_point::max();  // of the workers not yet done
    for (SimulatedWorker* w : workers) {
      if (!w->done() && w->next_turn() <= BenchClock::now()) w->Turn(heartbeats, tally);
      if (!w->done()) first_ready = std::min(first_ready, w->next_turn());
    }
    if (first_ready == BenchClock::time_point::max()) return;
    if (first_ready > BenchClock::now()) std::this_thread::sleep_until(first_ready);
  }
}

// A job result: member 0 of the bench's jobs trained on the bench data, once.
MemberResult TemplateResult() {
  StatusOr<MemberResult> trained = TrainMember(BenchSpecs(1)[0], BenchData(), {});
  if (!trained.ok()) Die("training the template result: " + trained.status().ToString());
  return std::move(trained).value();
}

struct RunFigures {
  int workers = 0, jobs = 0;
  double wall_s = 0, startup_cpu_s = 0, cpu_s = 0;
  long ready_rss_kib = 0, hwm_kib = 0, data_bytes = 0;
  Tally tally;
  double cpu_per_job_ms() const { return cpu_s / jobs * 1e3; }
};

RunFigures RunOnce(int workers, int jobs, int threads, int heartbeats, const std::string& scratch,
                   const MemberResult& result) {
  CoordinatorProcess coordinator(jobs, scratch);
  const std::string target = "127.0.0.1:" + std::to_string(coordinator.ready().port);
  const auto start = BenchClock::now();
  std::vector<std::unique_ptr<SimulatedWorker>> all;
  std::vector<std::vector<SimulatedWorker*>> shares(static_cast<size_t>(threads));
  for (int i = 0; i < workers; ++i) {
    all.push_back(std::make_unique<SimulatedWorker>(target, &result));
    shares[static_cast<size_t>(i % threads)].push_back(all.back().get());
  }
  std::vector<Tally> tallies(static_cast<size_t>(threads));
  std::vector<std::thread> pool;
  for (int t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] { DriveWorkers(shares[t], heartbeats, tallies[t]); });
  }
  for (std::thread& t : pool) t.join();
  RunFigures f;
  f.wall_s = Seconds(BenchClock::now() - start);
  const CoordinatorProcess::Served served = coordinator.Finish();
  if (served.finished != jobs) {
    Die("the coordinator stored " + std::to_string(served.finished) + " of " + std::to_string(jobs) + " jobs");
  }
  f.workers = workers, f.jobs = jobs;
  f.startup_cpu_s = coordinator.ready().cpu_s;
  f.cpu_s = served.cpu_s - coordinator.ready().cpu_s;
  f.ready_rss_kib = coordinator.ready().rss_kib;
  f.hwm_kib = served.hwm_kib;
  f.data_bytes = coordinator.ready().data_bytes;
  for (const Tally& t : tallies) f.tally.Add(t);
  return f;
}

void PrintRun(RunFigures& f, int threads, int heartbeats) {
  Tally& t = f.tally;
  std::printf("many_workers workers=%d jobs=%d threads=%d heartbeats=%d wall_s=%.1f jobs_per_s=%.0f "
              "startup_cpu_s=%.2f coordinator_cpu_s=%.2f cpu_per_job_ms=%.3f ready_rss_mib=%.1f hwm_mib=%.1f "
              "lease_p50_ms=%.3f lease_p99_ms=%.3f fetches=%lld fetch_bytes=%lld data_bytes=%ld uploads=%lld "
              "waits=%lld errors=%lld\n",
              f.workers, f.jobs, threads, heartbeats, f.wall_s, f.jobs / f.wall_s, f.startup_cpu_s, f.cpu_s,
              f.cpu_per_job_ms(), f.ready_rss_kib / 1024.0, f.hwm_kib / 1024.0, bench::Percentile(t.lease_ms, 0.5),
              bench::Percentile(t.lease_ms, 0.99), static_cast<long long>(t.fetches),
              static_cast<long long>(t.fetch_bytes), f.data_bytes, static_cast<long long>(t.uploads),
              static_cast<long long>(t.waits), static_cast<long long>(t.errors));
  if (t.errors > 0) std::fprintf(stderr, "chorus-bench-many-workers: first error: %s\n", t.first_error.c_str());
  std::fflush(stdout);
}

// The least-squares line y = intercept + slope x through (x, y) points; slope 0 with fewer than
// two distinct x.
struct Line {
  double slope = 0, intercept = 0;
};
Line FitLine(const std::vector<std::pair<double, double>>& points) {
  double mx = 0, my = 0;
  for (const auto& [x, y] : points) mx += x, my += y;
  mx /= static_cast<double>(points.size()), my /= static_cast<double>(points.size());
  double sxy = 0, sxx = 0;
  for (const auto& [x, y] : points) sxy += (x - mx) * (y - my), sxx += (x - mx) * (x - mx);
  const double slope = sxx > 0 ? sxy / sxx : 0;
  return {slope, my - slope * mx};
}

int Main(int workers, int jobs, int threads, int heartbeats, bool single, const std::string& scratch) {
  bench::PrintMachine();
  if (const char* coretype = std::getenv("OPENBLAS_CORETYPE")) std::printf("env: OPENBLAS_CORETYPE=%s\n", coretype);
  const MemberResult result = TemplateResult();
  const int fixed_jobs = std::max(jobs / 50, workers);
  std::vector<std::pair<int, int>> sizes;  // (workers, jobs), the full size last
  if (!single) {
    sizes = {{workers / 4, fixed_jobs}, {workers / 2, fixed_jobs}, {workers, fixed_jobs}, {workers, jobs / 10}};
  }
  sizes.emplace_back(workers, jobs);
  std::vector<RunFigures> runs;
  for (size_t i = 0; i < sizes.size(); ++i) {
    const auto [w, j] = sizes[i];
    if (w < 1 || j < 1 || std::find(sizes.begin(), sizes.begin() + i, sizes[i]) != sizes.begin() + i) continue;
    runs.push_back(RunOnce(w, j, std::min(threads, w), heartbeats, scratch, result));
    PrintRun(runs.back(), std::min(threads, w), heartbeats);
  }
  std::vector<std::pair<double, double>> by_jobs, by_workers;
  for (const RunFigures& f : runs) {
    if (f.workers == workers) by_jobs.emplace_back(f.jobs, f.hwm_kib);
    if (f.jobs == fixed_jobs) by_workers.emplace_back(f.workers, f.hwm_kib);
  }
  if (by_jobs.size() >= 2 && by_workers.size() >= 2) {
    const Line per_job = FitLine(by_jobs), per_worker = FitLine(by_workers);
    std::printf("many_workers fit memory_per_job_kib=%.3f base_mib=%.1f (hwm over jobs, %zu runs at workers=%d) "
                "memory_per_worker_kib=%.1f base_mib=%.1f (hwm over workers, %zu runs at jobs=%d)\n",
                per_job.slope, per_job.intercept / 1024, by_jobs.size(), workers, per_worker.slope,
                per_worker.intercept / 1024, by_workers.size(), fixed_jobs);
  }
  const double per_job_ms = runs.back().cpu_per_job_ms();
  const double percent = per_job_ms / (kJobSeconds * 1e3) * 100;
  std::printf("many_workers overhead job_seconds=%.0f cpu_per_job_ms=%.3f overhead_percent=%.4f target_percent=1 "
              "target_met=%s\n", kJobSeconds, per_job_ms, percent, percent < 1 ? "yes" : "no");
  return 0;
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) {
  CLI::App app{"chorus-bench-many-workers: the coordinator's CPU and memory with many workers and many jobs"};
  int workers = 1000, jobs = 100000, threads = 16, heartbeats = 6;
  bool single = false, quick = false, serve = false;
  std::string scratch = std::filesystem::is_directory("/dev/shm") ? "/dev/shm"
                                                                    : std::filesystem::temp_directory_path().string();
  app.add_option("--workers", workers, "simulated workers, each with its own connection")
      ->check(CLI::Range(1, 4096))->capture_default_str();
  app.add_option("--jobs", jobs, "jobs in the run")->check(CLI::Range(1, 10000000))->capture_default_str();
  app.add_option("--threads", threads, "threads the workers are multiplexed onto")
      ->check(CLI::Range(1, 64))->capture_default_str();
  app.add_option("--heartbeats", heartbeats, "heartbeats per job (6: a one-minute job)")
      ->check(CLI::Range(0, 1000))->capture_default_str();
  app.add_option("--scratch", scratch, "where the coordinator's run directory goes")->capture_default_str();
  app.add_flag("--single", single, "only the W x J run: no memory fits");
  app.add_flag("--quick", quick, "a smoke run: 50 workers, 2000 jobs");
  app.add_flag("--serve", serve, "internal: be the coordinator's process for --jobs jobs");
  CLI11_PARSE(app, argc, argv);
  if (serve) return chorus::Serve(jobs, scratch);
  if (quick) workers = 50, jobs = 2000;
  return chorus::Main(workers, jobs, threads, heartbeats, single, scratch);
}

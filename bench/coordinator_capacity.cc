// chorus-bench-coordinator: how many lease round-trips per second the coordinator's gRPC service
// sustains while many workers poll it at once.
//
// The real CoordinatorService (token check, JobTable, events.jsonl in a scratch run directory)
// listens on 127.0.0.1 with an ephemeral port and dispatches many tiny jobs over a fake data set of
// a few rows. W simulated workers, each a thread with its own channel and TCP connection, register
// and then repeat, without training, one cycle: Lease -> Heartbeat -> ReportFailure (cause
// "bench", deterministic=false) on even cycles or ReturnLease on odd ones, so the job goes back to
// the queue. Jobs outnumber workers four to one and attempts are unlimited, so a Lease always
// finds a job. After every worker has registered, the timed window runs for S seconds; cycles
// that end after it are not counted.
// Usage: chorus-bench-coordinator [--workers W (256)] [--seconds S (10)]
// Output: one "machine:" line, then
//   coordinator workers=W jobs=J seconds=S cycles=C cycles_per_s=R rpcs_per_s=P
//   lease_p50_ms=.. lease_p99_ms=.. cycle_p50_ms=.. cycle_p99_ms=.. waits=N errors=E
#include <CLI/CLI.hpp>
#include <grpcpp/grpcpp.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <climits>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <thread>
#include <vector>

#include "bench/service_bench.h"
#include "coordinator/coordinator_service.h"
#include "proto/data_codec.h"

namespace chorus {
namespace {

using BenchClock = std::chrono::steady_clock;

constexpr char kToken[] = "capacity-bench-token-3f9a51c0";
constexpr int kJobsPerWorker = 4;

// What one simulated worker measured inside the timed window.
struct WorkerStats {
  std::vector<double> lease_ms;  // one per Lease call
  std::vector<double> cycle_ms;  // one per complete Lease -> ... -> ReportFailure/ReturnLease
  int64_t rpcs = 0;
  int64_t waits = 0;   // Lease answered WAIT or DONE
  int64_t errors = 0;  // calls that did not return OK
};

// The window every worker measures in. Workers count themselves in `registered`; once all are
// in, the driver writes `end` and only then sets `ready`, after which workers read it.
struct Window {
  std::atomic<int> registered{0};
  std::atomic<bool> ready{false};
  BenchClock::time_point end;
};

double MillisSince(BenchClock::time_point t) {
  return std::chrono::duration<double, std::milli>(BenchClock::now() - t).count();
}

// One worker's connection: its own channel (a local subchannel pool, so its own TCP connection).
class FakeWorker {
 public:
  explicit FakeWorker(const std::string& target) {
    grpc::ChannelArguments args;
    args.SetInt(GRPC_ARG_USE_LOCAL_SUBCHANNEL_POOL, 1);
    stub_ = wire::Coordinator::NewStub(
        grpc::CreateCustomChannel(target, grpc::InsecureChannelCredentials(), args));
  }

  // Registers, waits for the window, then cycles until it ends.
  WorkerStats Run(Window& window) {
    WorkerStats stats;
    wire::RegisterReply reg;
    if (!stub_->Register(Context().get(), wire::RegisterRequest(), &reg).ok()) ++stats.errors;
    id_ = reg.worker_id();
    ++window.registered;
    while (!window.ready) std::this_thread::sleep_for(std::chrono::milliseconds(1));
    for (int64_t n = 0; BenchClock::now() < window.end; ++n) Cycle(n % 2 == 0, window, stats);
    return stats;
  }

 private:
  static std::unique_ptr<grpc::ClientContext> Context() {
    auto ctx = std::make_unique<grpc::ClientContext>();
    ctx->AddMetadata("x-chorus-token", kToken);
    ctx->set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(30));
    return ctx;
  }

  // Lease, Heartbeat, then give the job back by failure report or return; recorded in `stats`
  // only if it ended inside the window.
  void Cycle(bool report_failure, const Window& window, WorkerStats& stats) {
    const auto start = BenchClock::now();
    wire::LeaseRequest request;
    request.set_worker_id(id_);
    wire::LeaseReply lease;
    const bool leased = stub_->Lease(Context().get(), request, &lease).ok();
    const double lease_ms = MillisSince(start);
    const bool job = leased && lease.kind() == wire::LeaseReply::JOB;
    int64_t errors = leased ? 0 : 1;
    if (job) {
      wire::HeartbeatRequest beat;
      beat.set_worker_id(id_);
      beat.set_job_id(lease.job_id());
      beat.set_lease_id(lease.lease_id());
      wire::HeartbeatReply beat_reply;
      errors += !stub_->Heartbeat(Context().get(), beat, &beat_reply).ok();
      errors += !GiveBack(report_failure, lease).ok();
    }
    if (BenchClock::now() > window.end) return;
    stats.lease_ms.push_back(lease_ms);
    stats.cycle_ms.push_back(MillisSince(start));
    stats.rpcs += job ? 3 : 1;
    stats.waits += leased && !job;
    stats.errors += errors;
  }

  grpc::Status GiveBack(bool report_failure, const wire::LeaseReply& lease) {
    if (report_failure) {
      wire::FailureRequest f;
      f.set_worker_id(id_);
      f.set_job_id(lease.job_id());
      f.set_lease_id(lease.lease_id());
      f.set_cause("bench");
      f.set_deterministic(false);
      wire::FailureReply reply;
      return stub_->ReportFailure(Context().get(), f, &reply);
    }
    wire::ReturnLeaseRequest r;
    r.set_worker_id(id_);
    r.set_job_id(lease.job_id());
    r.set_lease_id(lease.lease_id());
    wire::ReturnLeaseReply reply;
    return stub_->ReturnLease(Context().get(), r, &reply);
  }

  std::unique_ptr<wire::Coordinator::Stub> stub_;
  std::string id_;
};

// Runs `workers` simulated workers against `target` for `seconds`; returns their merged stats.
WorkerStats Drive(const std::string& target, int workers, double seconds) {
  Window window;
  std::vector<std::unique_ptr<FakeWorker>> fakes;
  for (int i = 0; i < workers; ++i) fakes.push_back(std::make_unique<FakeWorker>(target));
  std::vector<WorkerStats> stats(static_cast<size_t>(workers));
  std::vector<std::thread> threads;
  for (int i = 0; i < workers; ++i) {
    threads.emplace_back([&, i] { stats[i] = fakes[i]->Run(window); });
  }
  while (window.registered < workers) std::this_thread::sleep_for(std::chrono::milliseconds(1));
  window.end = BenchClock::now() + std::chrono::duration_cast<BenchClock::duration>(
                                       std::chrono::duration<double>(seconds));
  window.ready = true;
  for (auto& t : threads) t.join();
  WorkerStats all;
  for (WorkerStats& s : stats) {
    all.lease_ms.insert(all.lease_ms.end(), s.lease_ms.begin(), s.lease_ms.end());
    all.cycle_ms.insert(all.cycle_ms.end(), s.cycle_ms.begin(), s.cycle_ms.end());
    all.rpcs += s.rpcs;
    all.waits += s.waits;
    all.errors += s.errors;
  }
  return all;
}

// The coordinator as `chorus run` builds it, serving `jobs` tiny jobs, with its scratch run
// directory under `scratch`. Exits with a message if it cannot start.
class BenchCoordinator {
 public:
  BenchCoordinator(int jobs, const std::string& scratch)
      : table_(0, INT_MAX, 30.0), dir_(CreateRunDir(scratch)),
        service_(Inputs(), &table_, &dir_) {
    service_.AddJobs(bench::TinySpecs(jobs));
    service_.Close();
    server_ = bench::ServeOnLoopback(&service_, &port_);
    if (!server_) Die("cannot listen on 127.0.0.1");
  }
  ~BenchCoordinator() { server_->Shutdown(std::chrono::system_clock::now()); }

  std::string target() const { return "127.0.0.1:" + std::to_string(port_); }

 private:
  [[noreturn]] static void Die(const std::string& why) {
    std::fprintf(stderr, "chorus-bench-coordinator: %s\n", why.c_str());
    std::exit(1);
  }
  static RunDirectory CreateRunDir(const std::string& scratch) {
    StatusOr<RunDirectory> dir = RunDirectory::Create(scratch, "capacity");
    if (!dir.ok()) Die(dir.status().ToString());
    return std::move(dir).value();
  }
  static DispatchInputs Inputs() {
    const PreparedData data = bench::TinyData("capacity-bench-data");
    return {EncodePreparedData(data), data.hash, "capacity-bench-config", 30.0,
            kToken, ServiceLimits{}};
  }

  JobTable table_;
  RunDirectory dir_;
  CoordinatorService service_;
  int port_ = 0;
  std::unique_ptr<grpc::Server> server_;
};

// A fresh directory under the system temp dir for the run directory; exits if none can be made.
std::string ScratchDir() {
  std::string path = (std::filesystem::temp_directory_path() / "chorus-bench-XXXXXX").string();
  if (mkdtemp(path.data()) == nullptr) {
    std::perror("chorus-bench-coordinator: mkdtemp");
    std::exit(1);
  }
  return path;
}

void PrintReport(int workers, int jobs, double seconds, WorkerStats& s) {
  const double cycles = static_cast<double>(s.cycle_ms.size());
  std::printf("coordinator workers=%d jobs=%d seconds=%.1f cycles=%.0f cycles_per_s=%.0f "
              "rpcs_per_s=%.0f lease_p50_ms=%.2f lease_p99_ms=%.2f cycle_p50_ms=%.2f "
              "cycle_p99_ms=%.2f waits=%lld errors=%lld\n",
              workers, jobs, seconds, cycles, cycles / seconds, s.rpcs / seconds,
              bench::Percentile(s.lease_ms, 0.5), bench::Percentile(s.lease_ms, 0.99),
              bench::Percentile(s.cycle_ms, 0.5), bench::Percentile(s.cycle_ms, 0.99),
              static_cast<long long>(s.waits), static_cast<long long>(s.errors));
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) {
  CLI::App app{"chorus-bench-coordinator: lease round-trips per second of the coordinator's gRPC "
               "service with many simulated workers (no training)"};
  int workers = 256;
  double seconds = 10;
  app.add_option("--workers", workers, "simulated workers, one thread and connection each")
      ->check(CLI::Range(1, 4096))->capture_default_str();
  app.add_option("--seconds", seconds, "length of the timed window")
      ->check(CLI::Range(0.1, 3600.0))->capture_default_str();
  CLI11_PARSE(app, argc, argv);
  chorus::bench::PrintMachine();
  const std::string scratch = chorus::ScratchDir();
  const int jobs = workers * chorus::kJobsPerWorker;
  chorus::WorkerStats stats;
  {
    chorus::BenchCoordinator coordinator(jobs, scratch);
    stats = chorus::Drive(coordinator.target(), workers, seconds);
  }
  std::filesystem::remove_all(scratch);
  chorus::PrintReport(workers, jobs, seconds, stats);
  return 0;
}

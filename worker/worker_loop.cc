#include "worker/worker_loop.h"

#include <tbb/task_arena.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <mutex>
#include <thread>
#include <vector>

#include "common/host_name.h"
#include "common/log_format.h"
#include "common/member_training.h"
#include "common/sha256.h"
#include "proto/result_codec.h"
#include "proto/spec_codec.h"
#include "worker/data_cache.h"
#include "worker/tbb_parallel_for.h"

namespace chorus {
namespace {

using std::chrono::duration;
using SteadyClock = std::chrono::steady_clock;

// Sleeps up to `seconds`, returning early when `stop` is set.
void SleepUnlessStopped(double seconds, const std::atomic<bool>& stop) {
  const auto until = SteadyClock::now() + duration<double>(seconds);
  while (!stop.load() && SteadyClock::now() < until) {
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
}

// Renews one lease every period seconds with the latest progress, until Stop(). Sets `cancel` if
// the coordinator says the lease is gone.
class Heartbeat {
 public:
  Heartbeat(CoordinatorClient* client, wire::HeartbeatRequest base, double period,
            std::atomic<bool>* cancel)
      : client_(client), request_(std::move(base)), period_(period), cancel_(cancel),
        thread_([this] { Loop(); }) {}
  ~Heartbeat() { Stop(); }

  void Update(const EpochProgress& p, double samples_per_second) {
    std::lock_guard<std::mutex> lock(mu_);
    request_.set_epoch(p.epoch);
    request_.set_epochs(p.epochs);
    request_.set_loss(p.mean_loss);
    request_.set_samples_per_second(samples_per_second);
  }

  void Stop() {
    {
      std::lock_guard<std::mutex> lock(mu_);
      stopped_ = true;
    }
    wake_.notify_all();
    if (thread_.joinable()) thread_.join();
  }

 private:
  void Loop() {
    std::unique_lock<std::mutex> lock(mu_);
    while (!wake_.wait_for(lock, duration<double>(period_), [this] { return stopped_; })) {
      const wire::HeartbeatRequest request = request_;
      lock.unlock();
      wire::HeartbeatReply reply;
      const Status st = client_->Heartbeat(request, &reply);
      if (st.ok() && !reply.keep_going()) cancel_->store(true);
      lock.lock();
    }
  }

  CoordinatorClient* client_;
  wire::HeartbeatRequest request_;
  const double period_;
  std::atomic<bool>* cancel_;
  std::mutex mu_;
  std::condition_variable wake_;
  bool stopped_ = false;
  std::thread thread_;
};

struct Shared {
  const WorkerOptions& options;
  const std::atomic<bool>& stop;
  CoordinatorClient* client;
  DataCache* cache;
  std::string worker_id;
  double lease_seconds;
  // Training runs in one arena of `slots` threads: a member's minibatch parts (train.parts) can
  // use the threads of idle slots, and never more threads than slots.
  tbb::task_arena* arena;
  const ParallelFor* parallel;
};

// Sends a result without a second copy of it in memory: one encoding pass for its size and
// SHA-256 (which the protocol's first chunk carries), a second straight into the upload stream.
Status Upload(const Shared& s, const wire::LeaseReply& lease, const std::vector<int>& widths,
              const MemberResult& result) {
  const auto write = [&](const ByteSink& sink) {
    return WriteJobResult(result, widths, lease.data_hash(), lease.config_hash(), sink);
  };
  Sha256 sha;
  int64_t total = 0;
  write([&](const char* bytes, size_t n) {
    sha.Update(bytes, n);
    total += static_cast<int64_t>(n);
    return true;
  });
  wire::UploadReply reply;
  return s.client->UploadResult(s.worker_id, lease.job_id(), lease.lease_id(), total,
                                sha.FinishHex(), write, &reply);
}

// Trains one leased job and reports its outcome.
void RunJob(const Shared& s, const wire::LeaseReply& lease) {
  std::atomic<bool> cancel{false};
  StatusOr<MemberResult> result = Status::Internal("not run");
  std::string data_hash = lease.data_hash();
  StatusOr<std::shared_ptr<const PreparedData>> data = s.cache->Get(data_hash);
  StatusOr<MemberSpec> spec = SpecFromWire(lease.spec());
  if (!data.ok() || !spec.ok()) {
    result = !data.ok() ? data.status() : spec.status();
  } else {
    wire::HeartbeatRequest base;
    base.set_worker_id(s.worker_id);
    base.set_job_id(lease.job_id());
    base.set_lease_id(lease.lease_id());
    Heartbeat heartbeat(s.client, base, std::max(0.2, s.lease_seconds / 3), &cancel);
    const auto start = SteadyClock::now();
    const double rows = static_cast<double>(data.value()->train.rows());
    auto progress = [&](const EpochProgress& p) {
      const double secs = duration<double>(SteadyClock::now() - start).count();
      heartbeat.Update(p, rows * p.epoch / std::max(secs, 1e-9));
      if (s.stop.load()) cancel.store(true);
    };
    s.arena->execute(
        [&] { result = TrainMember(spec.value(), *data.value(), progress, &cancel, s.parallel); });
    heartbeat.Stop();
  }
  if (result.ok()) {
    const Status st = Upload(s, lease, NetworkFor(spec.value().model, *data.value()).widths(),
                             result.value());
    if (!st.ok()) {
      LogLine(stderr, LogLevel::kError, "chorus-worker: upload of job " + lease.job_id() + " failed: " +
              st.ToString(), {{"job", lease.job_id()}, {"cause", st.ToString()}});
    }
    return;
  }
  if (result.status().code() == Status::Code::kCancelled) {
    wire::ReturnLeaseRequest r;
    r.set_worker_id(s.worker_id);
    r.set_job_id(lease.job_id());
    r.set_lease_id(lease.lease_id());
    s.client->ReturnLease(r);
    return;
  }
  wire::FailureRequest f;
  f.set_worker_id(s.worker_id);
  f.set_job_id(lease.job_id());
  f.set_lease_id(lease.lease_id());
  f.set_cause(result.status().ToString());
  f.set_deterministic(result.status().code() == Status::Code::kDiverged);
  s.client->ReportFailure(f);
}

// One slot: lease, run, repeat. Returns when stopped or (exit_when_done) when the run is over.
Status SlotLoop(const Shared& s) {
  double backoff = 0.25;
  while (!s.stop.load()) {
    wire::LeaseRequest request;
    request.set_worker_id(s.worker_id);
    wire::LeaseReply lease;
    const Status st = s.client->Lease(request, &lease);
    if (st.code() == Status::Code::kInvalidInput) return st;
    if (!st.ok()) {
      SleepUnlessStopped(backoff, s.stop);
      backoff = std::min(backoff * 2, s.options.max_backoff_seconds);
      continue;
    }
    backoff = 0.25;
    if (lease.kind() == wire::LeaseReply::JOB) {
      RunJob(s, lease);
    } else if (lease.kind() == wire::LeaseReply::DONE && s.options.exit_when_done) {
      return Status::Ok();
    } else {
      SleepUnlessStopped(std::max(0.05, lease.retry_after_seconds()), s.stop);
    }
  }
  return Status::Ok();
}

// Registers, retrying with backoff while the coordinator is unreachable.
Status RegisterWithBackoff(const WorkerOptions& o, const std::atomic<bool>& stop,
                           CoordinatorClient* client, wire::RegisterReply* reply) {
  wire::RegisterRequest request;
  request.set_host(HostName());
  request.set_slots(o.slots);
  request.set_pid(static_cast<int>(getpid()));
  double backoff = 0.25;
  while (!stop.load()) {
    const Status st = client->Register(request, reply);
    if (st.ok() || st.code() == Status::Code::kInvalidInput) return st;
    LogPrintf(stderr, LogLevel::kWarning, "chorus-worker: %s; retrying in %.1fs", st.ToString().c_str(),
              backoff);
    SleepUnlessStopped(backoff, stop);
    backoff = std::min(backoff * 2, o.max_backoff_seconds);
  }
  return Status::Cancelled("stopped before registering");
}

}  // namespace

Status RunWorker(const WorkerOptions& options, const std::atomic<bool>& stop) {
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<CoordinatorClient> client,
                          CoordinatorClient::Create(options.connection));
  wire::RegisterReply reg;
  const Status registered = RegisterWithBackoff(options, stop, client.get(), &reg);
  if (registered.code() == Status::Code::kCancelled) return Status::Ok();
  CHORUS_RETURN_IF_ERROR(registered);
  DataCache cache(client.get(), options.cache_dir);
  tbb::task_arena arena(options.slots);
  const TbbParallelFor parallel;
  const Shared shared{options, stop,           client.get(), &cache, reg.worker_id(),
                      reg.lease_seconds(), &arena, &parallel};
  std::vector<Status> outcomes(static_cast<size_t>(options.slots));
  std::vector<std::thread> slots;
  for (int i = 0; i < options.slots; ++i) {
    slots.emplace_back([&, i] { outcomes[i] = SlotLoop(shared); });
  }
  for (std::thread& t : slots) t.join();
  for (const Status& st : outcomes) CHORUS_RETURN_IF_ERROR(st);
  return Status::Ok();
}

}  // namespace chorus

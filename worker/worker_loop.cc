#include "worker/worker_loop.h"

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <memory>
#include <mutex>
#include <optional>
#include <thread>
#include <vector>

#include "common/host_name.h"
#include "common/log_format.h"
#include "common/member_training.h"
#include "common/sha256.h"
#include "execution/job_slots.h"
#include "proto/result_codec.h"
#include "proto/spec_codec.h"
#include "worker/data_cache.h"

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

// A leased job: its data from the cache (memory, disk, then FetchData), a heartbeat renewing the
// lease with the latest progress while it trains, and its outcome sent back: the result uploaded,
// the lease returned (cancelled) or the failure reported.
class LeasedJob final : public TakenJob {
 public:
  LeasedJob(const Shared& s, wire::LeaseReply lease) : s_(s), lease_(std::move(lease)) {}

  Status Prepare(const MemberSpec** spec, const PreparedData** data) override {
    StatusOr<std::shared_ptr<const PreparedData>> cached = s_.cache->Get(lease_.data_hash());
    CHORUS_RETURN_IF_ERROR(cached.status());
    data_ = std::move(cached).value();
    StatusOr<MemberSpec> parsed = SpecFromWire(lease_.spec());
    CHORUS_RETURN_IF_ERROR(parsed.status());
    spec_ = std::move(parsed).value();
    wire::HeartbeatRequest base;
    base.set_worker_id(s_.worker_id);
    base.set_job_id(lease_.job_id());
    base.set_lease_id(lease_.lease_id());
    heartbeat_.emplace(s_.client, base, std::max(0.2, s_.lease_seconds / 3), &cancel);
    start_ = SteadyClock::now();
    *spec = &spec_.value();
    *data = data_.get();
    return Status::Ok();
  }

  void OnProgress(const EpochProgress& p) override {
    const double secs = duration<double>(SteadyClock::now() - start_).count();
    const double rows = static_cast<double>(data_->train.rows());
    heartbeat_->Update(p, rows * p.epoch / std::max(secs, 1e-9));
    if (s_.stop.load()) cancel.store(true);
  }

  void Finish(const StatusOr<MemberResult>& outcome) override {
    if (heartbeat_) heartbeat_->Stop();
    if (outcome.ok()) {
      const Status st = Upload(s_, lease_, NetworkFor(spec_->model, *data_).widths(), outcome.value());
      if (!st.ok()) {
        LogLine(stderr, LogLevel::kError, "chorus-worker: upload of job " + lease_.job_id() +
                " failed: " + st.ToString(), {{"job", lease_.job_id()}, {"cause", st.ToString()}});
      }
      return;
    }
    if (outcome.status().code() == Status::Code::kCancelled) {
      wire::ReturnLeaseRequest r;
      r.set_worker_id(s_.worker_id);
      r.set_job_id(lease_.job_id());
      r.set_lease_id(lease_.lease_id());
      s_.client->ReturnLease(r);
      return;
    }
    wire::FailureRequest f;
    f.set_worker_id(s_.worker_id);
    f.set_job_id(lease_.job_id());
    f.set_lease_id(lease_.lease_id());
    f.set_cause(outcome.status().ToString());
    f.set_deterministic(outcome.status().code() == Status::Code::kDiverged);
    s_.client->ReportFailure(f);
  }

 private:
  const Shared& s_;
  const wire::LeaseReply lease_;
  std::shared_ptr<const PreparedData> data_;
  std::optional<MemberSpec> spec_;
  std::optional<Heartbeat> heartbeat_;
  SteadyClock::time_point start_;
};

// Jobs leased from the coordinator, with backoff while it is away. A slot ends when stopped or
// (exit_when_done) when the run is over; a refused token ends it with kInvalidInput.
class LeaseSource final : public JobSource {
 public:
  explicit LeaseSource(const Shared& s) : s_(s) {}

  StatusOr<std::unique_ptr<TakenJob>> Take() override {
    double backoff = 0.25;
    while (!s_.stop.load()) {
      wire::LeaseRequest request;
      request.set_worker_id(s_.worker_id);
      wire::LeaseReply lease;
      const Status st = s_.client->Lease(request, &lease);
      if (st.code() == Status::Code::kInvalidInput) return st;
      if (!st.ok()) {
        SleepUnlessStopped(backoff, s_.stop);
        backoff = std::min(backoff * 2, s_.options.max_backoff_seconds);
        continue;
      }
      backoff = 0.25;
      if (lease.kind() == wire::LeaseReply::JOB) {
        return std::unique_ptr<TakenJob>(std::make_unique<LeasedJob>(s_, std::move(lease)));
      }
      if (lease.kind() == wire::LeaseReply::DONE && s_.options.exit_when_done) break;
      SleepUnlessStopped(std::max(0.05, lease.retry_after_seconds()), s_.stop);
    }
    return std::unique_ptr<TakenJob>();
  }

 private:
  const Shared& s_;
};

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
  const Shared shared{options, stop, client.get(), &cache, reg.worker_id(), reg.lease_seconds()};
  LeaseSource source(shared);
  return RunJobSlots(source, options.slots);
}

}  // namespace chorus

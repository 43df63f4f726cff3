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

#include "common/gemm.h"
#include "common/host_name.h"
#include "common/log_format.h"
#include "common/member_training.h"
#include "execution/job_slots.h"
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

// Renews one lease every period seconds with the latest progress, and at the end of an epoch when
// kEpochBeatSeconds have passed since the last renewal, until Stop(). Sets `cancel` if the
// coordinator says the lease is gone, and `extra_threads` to the threads it grants the job (so a
// grant reaches a job within an epoch or two, not a whole period).
class Heartbeat {
 public:
  Heartbeat(CoordinatorClient* client, wire::HeartbeatRequest base, double period,
            std::atomic<bool>* cancel, std::atomic<int>* extra_threads)
      : client_(client), request_(std::move(base)), period_(period), cancel_(cancel),
        extra_threads_(extra_threads), thread_([this] { Loop(); }) {}
  ~Heartbeat() { Stop(); }

  void Update(const EpochProgress& p, double samples_per_second) {
    std::lock_guard<std::mutex> lock(mu_);
    request_.set_epoch(p.epoch);
    request_.set_epochs(p.epochs);
    request_.set_loss(p.mean_loss);
    request_.set_samples_per_second(samples_per_second);
    if (SteadyClock::now() - last_sent_ >= duration<double>(kEpochBeatSeconds)) {
      beat_now_ = true;
      wake_.notify_all();
    }
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
    while (true) {
      wake_.wait_for(lock, duration<double>(period_), [this] { return stopped_ || beat_now_; });
      if (stopped_) break;
      beat_now_ = false;
      last_sent_ = SteadyClock::now();
      const wire::HeartbeatRequest request = request_;
      lock.unlock();
      wire::HeartbeatReply reply;
      const Status st = client_->Heartbeat(request, &reply);
      // kRefused: the coordinator no longer knows this worker (it restarted), so neither the lease.
      if ((st.ok() && !reply.keep_going()) || st.code() == Status::Code::kRefused) cancel_->store(true);
      if (st.ok()) extra_threads_->store(std::max(0, reply.extra_threads()));
      lock.lock();
    }
  }

  CoordinatorClient* client_;
  wire::HeartbeatRequest request_;
  const double period_;
  std::atomic<bool>* cancel_;
  std::atomic<int>* extra_threads_;
  std::mutex mu_;
  std::condition_variable wake_;
  static constexpr double kEpochBeatSeconds = 2.0;
  bool stopped_ = false;
  bool beat_now_ = false;
  SteadyClock::time_point last_sent_ = SteadyClock::now();
  std::thread thread_;
};

// Registers, retrying with backoff while the coordinator is unreachable or busy.
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

// The id this worker is registered under, shared by its slot threads. A coordinator resumed after
// a restart knows none of the ids its predecessor gave out and refuses them: the first slot to
// be refused registers again and the others then use the new id.
class Registration {
 public:
  Registration(const WorkerOptions& o, const std::atomic<bool>& stop, CoordinatorClient* client)
      : options_(o), stop_(stop), client_(client) {}

  // Registers (again, if `stale` is still the current id; otherwise another slot already did).
  // kCancelled if stopped first, kInvalidInput if the token was refused.
  Status Renew(const std::string& stale) {
    std::lock_guard<std::mutex> lock(mu_);
    if (id_ != stale) return Status::Ok();
    wire::RegisterReply reply;
    CHORUS_RETURN_IF_ERROR(RegisterWithBackoff(options_, stop_, client_, &reply));
    if (!id_.empty()) {
      LogLine(stderr, LogLevel::kWarning, "chorus-worker: the coordinator no longer knows worker " + id_ +
              " (it restarted?); registered again as " + reply.worker_id(),
              {{"stale_worker", id_}, {"worker", reply.worker_id()}});
    }
    id_ = reply.worker_id();
    lease_seconds_ = reply.lease_seconds();
    return Status::Ok();
  }

  std::string id() const {
    std::lock_guard<std::mutex> lock(mu_);
    return id_;
  }
  double lease_seconds() const {
    std::lock_guard<std::mutex> lock(mu_);
    return lease_seconds_;
  }

 private:
  const WorkerOptions& options_;
  const std::atomic<bool>& stop_;
  CoordinatorClient* client_;
  mutable std::mutex mu_;
  std::string id_;              // guarded by mu_; "" before the first registration
  double lease_seconds_ = 0;    // guarded by mu_
};

struct Shared {
  const WorkerOptions& options;
  const std::atomic<bool>& stop;
  CoordinatorClient* client;
  DataCache* cache;
  Registration* registration;
};

// How long a finished job's upload is retried while the coordinator is unreachable or busy (all
// its upload slots taken). Seconds.
constexpr double kUploadRetrySeconds = 300;

// Sends a result (CoordinatorClient::UploadJobResult), repeated with backoff while the
// coordinator answers kUnavailable, up to kUploadRetrySeconds or until stopped. Each attempt
// hashes the result again (OpenSSL SHA-256 here: 1.4 GB/s, so 50 MB in about 35 ms), a cost only
// retries after a backoff of 0.25 s or more pay.
Status Upload(const Shared& s, const std::string& worker_id, const wire::LeaseReply& lease,
              const std::vector<int>& widths, const MemberResult& result) {
  const auto give_up = SteadyClock::now() + duration<double>(kUploadRetrySeconds);
  double backoff = 0.25;
  while (true) {
    wire::UploadReply reply;
    const Status st = s.client->UploadJobResult(worker_id, lease, widths, result, &reply);
    if (st.code() != Status::Code::kUnavailable || s.stop.load() || SteadyClock::now() >= give_up) return st;
    LogPrintf(stderr, LogLevel::kWarning, "chorus-worker: upload of job %s: %s; retrying in %.1fs",
              lease.job_id().c_str(), st.ToString().c_str(), backoff);
    SleepUnlessStopped(backoff, s.stop);
    backoff = std::min(backoff * 2, s.options.max_backoff_seconds);
  }
}

// A leased job: its data from the cache (memory, disk, then FetchData), a heartbeat renewing the
// lease with the latest progress while it trains, and its outcome sent back: the result uploaded,
// the lease returned (cancelled) or the failure reported.
class LeasedJob final : public TakenJob {
 public:
  // `worker_id`: the id the job was leased under.
  LeasedJob(const Shared& s, std::string worker_id, wire::LeaseReply lease)
      : s_(s), worker_id_(std::move(worker_id)), lease_(std::move(lease)) {}

  Status Prepare(const MemberSpec** spec, const PreparedData** data) override {
    StatusOr<std::shared_ptr<const PreparedData>> cached = s_.cache->Get(lease_.data_hash());
    CHORUS_RETURN_IF_ERROR(cached.status());
    data_ = std::move(cached).value();
    StatusOr<MemberSpec> parsed = SpecFromWire(lease_.spec());
    CHORUS_RETURN_IF_ERROR(parsed.status());
    spec_ = std::move(parsed).value();
    if (spec_->train.products == ProductPrecision::kBf16 && !Bf16ProductsAvailable()) {
      static std::once_flag said;  // once per worker process, not per job
      std::call_once(said, [] {
        LogLine(stderr, LogLevel::kWarning,
                "chorus-worker: train.products: bf16, but this CPU has no AVX512_BF16: its jobs "
                "train with fp32 products",
                {{"products", "fp32"}});
      });
    }
    wire::HeartbeatRequest base;
    base.set_worker_id(worker_id_);
    base.set_job_id(lease_.job_id());
    base.set_lease_id(lease_.lease_id());
    heartbeat_.emplace(s_.client, base, std::max(0.2, s_.registration->lease_seconds() / 3), &cancel,
                       &extra_threads);
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
      const Status st = Upload(s_, worker_id_, lease_, NetworkFor(spec_->model, *data_).widths(), outcome.value());
      if (!st.ok()) {
        LogLine(stderr, LogLevel::kError, "chorus-worker: upload of job " + lease_.job_id() +
                " failed: " + st.ToString(), {{"job", lease_.job_id()}, {"cause", st.ToString()}});
      }
      return;
    }
    if (outcome.status().code() == Status::Code::kCancelled) {
      wire::ReturnLeaseRequest r;
      r.set_worker_id(worker_id_);
      r.set_job_id(lease_.job_id());
      r.set_lease_id(lease_.lease_id());
      s_.client->ReturnLease(r);
      return;
    }
    wire::FailureRequest f;
    f.set_worker_id(worker_id_);
    f.set_job_id(lease_.job_id());
    f.set_lease_id(lease_.lease_id());
    f.set_cause(outcome.status().ToString());
    f.set_deterministic(outcome.status().code() == Status::Code::kDiverged);
    s_.client->ReportFailure(f);
  }

 private:
  const Shared& s_;
  const std::string worker_id_;
  const wire::LeaseReply lease_;
  std::shared_ptr<const PreparedData> data_;
  std::optional<MemberSpec> spec_;
  std::optional<Heartbeat> heartbeat_;
  SteadyClock::time_point start_;
};

// Jobs leased from the coordinator, with backoff while it is away, registering again when it no
// longer knows this worker. A slot ends when stopped or (exit_when_done) when the run is over; a
// refused token ends it with kInvalidInput.
class LeaseSource final : public JobSource {
 public:
  explicit LeaseSource(const Shared& s) : s_(s) {}

  StatusOr<std::unique_ptr<TakenJob>> Take() override {
    double backoff = 0.25;
    while (!s_.stop.load()) {
      const std::string worker_id = s_.registration->id();
      wire::LeaseRequest request;
      request.set_worker_id(worker_id);
      wire::LeaseReply lease;
      const Status st = s_.client->Lease(request, &lease);
      if (st.code() == Status::Code::kInvalidInput) return st;
      if (st.code() == Status::Code::kRefused) {
        const Status renewed = s_.registration->Renew(worker_id);
        if (renewed.code() == Status::Code::kInvalidInput) return renewed;
        continue;
      }
      if (!st.ok()) {
        SleepUnlessStopped(backoff, s_.stop);
        backoff = std::min(backoff * 2, s_.options.max_backoff_seconds);
        continue;
      }
      backoff = 0.25;
      if (lease.kind() == wire::LeaseReply::JOB) {
        return std::unique_ptr<TakenJob>(std::make_unique<LeasedJob>(s_, worker_id, std::move(lease)));
      }
      if (lease.kind() == wire::LeaseReply::DONE && s_.options.exit_when_done) break;
      SleepUnlessStopped(std::max(0.05, lease.retry_after_seconds()), s_.stop);
    }
    return std::unique_ptr<TakenJob>();
  }

 private:
  const Shared& s_;
};

}  // namespace

Status RunWorker(const WorkerOptions& options, const std::atomic<bool>& stop) {
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<CoordinatorClient> client,
                          CoordinatorClient::Create(options.connection));
  Registration registration(options, stop, client.get());
  const Status registered = registration.Renew("");
  if (registered.code() == Status::Code::kCancelled) return Status::Ok();
  CHORUS_RETURN_IF_ERROR(registered);
  DataCache cache(client.get(), options.cache_dir);
  const Shared shared{options, stop, client.get(), &cache, &registration};
  LeaseSource source(shared);
  // Threads past the slots serve grants (execution/job_slots.h): the coordinator grants this
  // worker's jobs the slots of idle workers on this machine.
  return RunJobSlots(source, options.slots, static_cast<int>(std::thread::hardware_concurrency()));
}

}  // namespace chorus

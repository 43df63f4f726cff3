// The coordinator's gRPC service (proto/service.proto): authenticates every call, registers
// workers under unguessable ids and refuses calls naming any other id, hands out leases from the
// JobTable, streams the prepared data, receives and stores results, and records every lease,
// finish, failure and refusal in events.jsonl. Peers are bounded by ServiceLimits (registrations,
// host names, uploads open at once and their idle time), and refusals are logged at most once per
// kind, peer address and window (RefusalThrottle), so no peer can exhaust threads, memory or the
// event log. Proto types stop here: the rest of the coordinator sees JobTable, RunDirectory and
// plain structs.
// Thread safety: gRPC calls handlers concurrently; all shared state is guarded.
#pragma once

#include <map>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "common/member_training.h"
#include "coordinator/job_table.h"
#include "coordinator/refusal_throttle.h"
#include "coordinator/run_directory.h"
#include "coordinator/service_limits.h"
#include "coordinator/upload_slots.h"
#include "service.grpc.pb.h"

namespace chorus {

struct DispatchInputs {
  std::string data_bytes;         // EncodePreparedData(...)
  std::string data_hash;          // PreparedData::hash
  std::string config_hash;
  double lease_seconds = 30;
  std::string token;              // the shared secret every call must carry
  ServiceLimits limits;           // the bounds on peers; the defaults are chorus run's
};

// What the coordinator last heard from a worker, for the progress view.
struct WorkerView {
  std::string host;
  std::string job;                // "" when idle
  int epoch = 0, epochs = 0;
  double loss = 0, samples_per_second = 0;
  Clock::time_point last_seen;
  int slots = 1;                  // jobs it runs at once, as registered
  Clock::time_point last_refused; // when it last asked for a job and none was queued
};

class CoordinatorService final : public wire::Coordinator::Service {
 public:
  // Starts with no jobs; AddJobs adds them stage by stage.
  CoordinatorService(DispatchInputs inputs, JobTable* table, RunDirectory* dir);
  // How recently a worker must have asked for a job in vain to count as idle (ExtraThreads); an
  // idle worker asks every 0.5 s.
  static constexpr double kIdleFreshSeconds = 2.0;
  // Logs, for every kind of refusal and peer address, the refusals no event has counted yet.
  ~CoordinatorService() override;

  // Appends jobs to the table (job first + i trains specs[i]); returns `first`.
  int AddJobs(const std::vector<MemberSpec>& specs);
  // No more jobs will be added: once all are settled, workers asking for work are told DONE
  // (until then they are told to wait, even between stages).
  void Close();
  // The spec of job `job` (a table index).
  MemberSpec Spec(int job) const;

  grpc::Status Register(grpc::ServerContext* ctx, const wire::RegisterRequest* req,
                        wire::RegisterReply* reply) override;
  grpc::Status Lease(grpc::ServerContext* ctx, const wire::LeaseRequest* req,
                     wire::LeaseReply* reply) override;
  grpc::Status Heartbeat(grpc::ServerContext* ctx, const wire::HeartbeatRequest* req,
                         wire::HeartbeatReply* reply) override;
  grpc::Status FetchData(grpc::ServerContext* ctx, const wire::FetchDataRequest* req,
                         grpc::ServerWriter<wire::DataChunk>* writer) override;
  grpc::Status UploadResult(grpc::ServerContext* ctx, grpc::ServerReader<wire::ResultChunk>* reader,
                            wire::UploadReply* reply) override;
  grpc::Status ReportFailure(grpc::ServerContext* ctx, const wire::FailureRequest* req,
                             wire::FailureReply* reply) override;
  grpc::Status ReturnLease(grpc::ServerContext* ctx, const wire::ReturnLeaseRequest* req,
                           wire::ReturnLeaseReply* reply) override;

  // Every registered worker by id.
  std::map<std::string, WorkerView> Workers() const;
  // Calls refused for a missing or wrong token.
  int RefusedCalls() const;
  // UploadResult streams holding an upload slot now.
  int UploadsOpen() const { return uploads_.held(); }

 private:
  // UNAUTHENTICATED unless the call carries the token (constant-time comparison); a call_refused
  // event as Refuse decides. Once an address has sent more than limits.max_token_failures wrong
  // tokens in a window, the message says it is throttled.
  grpc::Status Authenticate(grpc::ServerContext* ctx);
  // FAILED_PRECONDITION ("register first"), with a worker_unknown event, unless Register gave out
  // `worker`: ids are not taken on a peer's word, and a coordinator resumed after a restart
  // knows none of the ids the last one gave, so its workers register again.
  grpc::Status CheckRegistered(grpc::ServerContext* ctx, const std::string& worker, const char* call);
  // The first chunk of an upload: the worker registered, the job known (else INVALID_ARGUMENT)
  // and leased to that worker under that lease (else PERMISSION_DENIED, result_refused). Sets
  // *job to the job's index.
  grpc::Status CheckUploader(grpc::ServerContext* ctx, const wire::ResultChunk& header, int* job);
  // Counts a refusal of `kind` from `peer` (ServerContext::peer(), taken before any cancel, after
  // which gRPC reports "unknown") by its address; if it opens a window, writes the `kind` event
  // with `fields`, the peer and how many went unlogged, and a warning on stderr.
  RefusalThrottle::Verdict Refuse(const std::string& peer, const std::string& kind, nlohmann::json fields,
                                  const std::string& message);
  // The job index named by job_id, or -1.
  int JobIndex(const std::string& job_id) const;
  // Stores a received result (checked by decoding) as jobs/<i>/result.pb, or compares a duplicate;
  // logs the job's end with the CPU-seconds the worker reported.
  grpc::Status Store(int job, const std::string& worker,
                     const std::optional<MemberResult::CpuSeconds>& cpu_seconds, const std::string& bytes,
                     wire::UploadReply* reply);
  void Seen(const std::string& worker, const std::string& job, const wire::HeartbeatRequest* progress);
  // Threads beyond one that `worker`'s job may use: the slots of the idle workers on its host
  // (idle: holds no job, and asked for one within kIdleFreshSeconds and none was queued), shared
  // among the host's busy workers. O(1) while no worker of the host is idle, else O(workers on the host).
  int ExtraThreads(const std::string& worker) const;

  // A host's registered workers, and how many of them hold no job.
  struct HostWorkers {
    std::vector<const WorkerView*> workers;  // into workers_ (std::map: stable addresses)
    int idle = 0;
  };

  const DispatchInputs in_;
  const std::string data_sha_;
  JobTable* table_;
  RunDirectory* dir_;
  mutable std::mutex mu_;
  std::vector<MemberSpec> specs_;              // guarded by mu_; job i trains specs_[i]
  bool closed_ = false;                        // guarded by mu_
  std::map<std::string, WorkerView> workers_;  // guarded by mu_; registered workers only
  std::map<std::string, HostWorkers> hosts_;   // guarded by mu_; by WorkerView::host
  int next_worker_ = 1;                        // guarded by mu_
  int refused_ = 0;                            // guarded by mu_
  RefusalThrottle refusals_;
  UploadSlots uploads_;
};

}  // namespace chorus

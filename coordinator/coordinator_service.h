// The coordinator's gRPC service (proto/service.proto): authenticates every call, hands out
// leases from the JobTable, streams the prepared data, receives and stores results, and records
// every lease, finish, failure and refusal in events.jsonl. Proto types stop here: the rest of
// the coordinator sees JobTable, RunDirectory and plain structs.
// Thread safety: gRPC calls handlers concurrently; all shared state is guarded.
#pragma once

#include <map>
#include <mutex>
#include <string>
#include <vector>

#include "common/member_training.h"
#include "coordinator/job_table.h"
#include "coordinator/run_directory.h"
#include "service.grpc.pb.h"

namespace chorus {

struct DispatchInputs {
  std::string data_bytes;         // EncodePreparedData(...)
  std::string data_hash;          // PreparedData::hash
  std::string config_hash;
  double lease_seconds = 30;
  std::string token;              // the shared secret every call must carry
};

// What the coordinator last heard from a worker, for the progress view.
struct WorkerView {
  std::string host;
  std::string job;                // "" when idle
  int epoch = 0, epochs = 0;
  double loss = 0, samples_per_second = 0;
  Clock::time_point last_seen;
};

class CoordinatorService final : public wire::Coordinator::Service {
 public:
  // Starts with no jobs; AddJobs adds them stage by stage.
  CoordinatorService(DispatchInputs inputs, JobTable* table, RunDirectory* dir);

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

  std::map<std::string, WorkerView> Workers() const;
  int RefusedCalls() const;

 private:
  // UNAUTHENTICATED (and an event) unless the call carries the token; constant-time comparison.
  grpc::Status Authenticate(grpc::ServerContext* ctx);
  // The job index named by job_id, or -1.
  int JobIndex(const std::string& job_id) const;
  // Stores a received result (checked by decoding) as jobs/<i>/result.pb, or compares a duplicate.
  grpc::Status Store(int job, const std::string& worker, const std::string& bytes, wire::UploadReply* reply);
  void Seen(const std::string& worker, const std::string& job, const wire::HeartbeatRequest* progress);

  const DispatchInputs in_;
  const std::string data_sha_;
  JobTable* table_;
  RunDirectory* dir_;
  mutable std::mutex mu_;
  std::vector<MemberSpec> specs_;              // guarded by mu_; job i trains specs_[i]
  bool closed_ = false;                        // guarded by mu_
  std::map<std::string, WorkerView> workers_;  // guarded by mu_
  int next_worker_ = 1;                        // guarded by mu_
  int refused_ = 0;                            // guarded by mu_
};

}  // namespace chorus

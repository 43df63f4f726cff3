#include "coordinator/coordinator_service.h"

#include <openssl/crypto.h>
#include <openssl/rand.h>

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <stdexcept>

#include "common/file_util.h"
#include "common/log_format.h"
#include "common/message_text.h"
#include "common/sha256.h"
#include "proto/result_codec.h"
#include "proto/result_upload.h"
#include "proto/spec_codec.h"

namespace chorus {
namespace {

constexpr size_t kChunkBytes = 1 << 20;
constexpr int64_t kMaxResultBytes = int64_t{4} << 30;
// How much of a peer's unknown worker id an event or message shows. Bytes.
constexpr size_t kShownIdBytes = 40;

grpc::Status Invalid(const std::string& msg) { return grpc::Status(grpc::StatusCode::INVALID_ARGUMENT, msg); }

// A worker id from a peer, fit for a message and the event log: at most kShownIdBytes, bytes
// outside printable ASCII as '?', and the full length when it was cut.
std::string ShownId(const std::string& id) {
  std::string shown = id.substr(0, kShownIdBytes);
  for (char& c : shown) {
    if (c < 0x20 || c > 0x7e) c = '?';
  }
  if (id.size() > kShownIdBytes) shown += "... (" + std::to_string(id.size()) + " bytes)";
  return "\"" + shown + "\"";
}

// "w<n>-<16 hex digits from OpenSSL's generator>": the counter keeps ids short to read in the
// progress view, the random part makes them impossible to guess.
std::string NewWorkerId(int n) {
  unsigned char raw[8];
  if (RAND_bytes(raw, sizeof raw) != 1) throw std::runtime_error("no random bytes for a worker id");
  std::string id = "w" + std::to_string(n) + "-";
  for (unsigned char b : raw) id += "0123456789abcdef"[b >> 4], id += "0123456789abcdef"[b & 15];
  return id;
}

}  // namespace

CoordinatorService::CoordinatorService(DispatchInputs inputs, JobTable* table, RunDirectory* dir)
    : in_(std::move(inputs)), data_sha_(Sha256Hex(in_.data_bytes.data(), in_.data_bytes.size())),
      table_(table), dir_(dir),
      refusals_(in_.limits.refusal_window_seconds, in_.limits.max_tracked_peers),
      uploads_(in_.limits.max_uploads, in_.limits.upload_idle_seconds) {}

CoordinatorService::~CoordinatorService() {
  for (const RefusalThrottle::Unlogged& u : refusals_.TakeUnlogged()) {
    dir_->LogEvent(u.kind, {{"peer_address", u.address}, {"unlogged", u.count}, {"summary", true}});
  }
}

int CoordinatorService::AddJobs(const std::vector<MemberSpec>& specs) {
  std::lock_guard<std::mutex> lock(mu_);
  specs_.insert(specs_.end(), specs.begin(), specs.end());
  return table_->AddJobs(static_cast<int>(specs.size()));
}

void CoordinatorService::Close() {
  std::lock_guard<std::mutex> lock(mu_);
  closed_ = true;
}

MemberSpec CoordinatorService::Spec(int job) const {
  std::lock_guard<std::mutex> lock(mu_);
  return specs_[static_cast<size_t>(job)];
}

RefusalThrottle::Verdict CoordinatorService::Refuse(const std::string& peer, const std::string& kind,
                                                    nlohmann::json fields, const std::string& message) {
  const std::string address = PeerAddress(peer);
  const RefusalThrottle::Verdict verdict = refusals_.Count(kind, address, Clock::now());
  if (!verdict.log) return verdict;
  fields["peer"] = peer;
  if (verdict.unlogged > 0) fields["unlogged"] = verdict.unlogged;
  LogLine(stderr, LogLevel::kWarning, "refused a call from " + peer + ": " + message +
          (verdict.unlogged > 0 ? " (and " + std::to_string(verdict.unlogged) +
                                  " such refusals from this address since the last report)" : ""),
          {{"peer", peer}, {"event", kind}});
  dir_->LogEvent(kind, std::move(fields));
  return verdict;
}

grpc::Status CoordinatorService::Authenticate(grpc::ServerContext* ctx) {
  const auto& md = ctx->client_metadata();
  const auto it = md.find("x-chorus-token");
  const bool ok = it != md.end() && it->second.size() == in_.token.size() &&
                  CRYPTO_memcmp(it->second.data(), in_.token.data(), in_.token.size()) == 0;
  if (ok) return grpc::Status::OK;
  {
    std::lock_guard<std::mutex> lock(mu_);
    ++refused_;
  }
  const std::string why = it == md.end() ? "no token" : "wrong token";
  const RefusalThrottle::Verdict verdict = Refuse(ctx->peer(), "call_refused", {{"why", why}}, why);
  if (verdict.in_window > in_.limits.max_token_failures) {
    return grpc::Status(grpc::StatusCode::UNAUTHENTICATED,
                        "missing or wrong token; throttled: " + std::to_string(verdict.in_window) +
                        " refused from " + PeerAddress(ctx->peer()) + " within " +
                        NumberText(in_.limits.refusal_window_seconds) + " s");
  }
  return grpc::Status(grpc::StatusCode::UNAUTHENTICATED, "missing or wrong token");
}

grpc::Status CoordinatorService::CheckRegistered(grpc::ServerContext* ctx, const std::string& worker,
                                                 const char* call) {
  {
    std::lock_guard<std::mutex> lock(mu_);
    if (workers_.count(worker) > 0) return grpc::Status::OK;
  }
  const std::string why = "worker " + ShownId(worker) + " is not registered; register first";
  Refuse(ctx->peer(), "worker_unknown", {{"worker", ShownId(worker)}, {"call", call}}, std::string(call) + ": " + why);
  return grpc::Status(grpc::StatusCode::FAILED_PRECONDITION, why);
}

int CoordinatorService::JobIndex(const std::string& job_id) const {
  int index = -1;
  try {
    size_t used = 0;
    index = std::stoi(job_id, &used);
    if (used != job_id.size()) return -1;
  } catch (...) {
    return -1;
  }
  std::lock_guard<std::mutex> lock(mu_);
  return index >= 0 && index < static_cast<int>(specs_.size()) ? index : -1;
}

void CoordinatorService::Seen(const std::string& worker, const std::string& job,
                              const wire::HeartbeatRequest* p) {
  std::lock_guard<std::mutex> lock(mu_);
  WorkerView& w = workers_[worker];
  if (w.job.empty() != job.empty()) hosts_[w.host].idle += job.empty() ? 1 : -1;
  w.job = job;
  w.last_seen = Clock::now();
  if (p != nullptr) {
    w.epoch = p->epoch();
    w.epochs = p->epochs();
    w.loss = p->loss();
    w.samples_per_second = p->samples_per_second();
  } else {
    w.epoch = w.epochs = 0;
  }
}

grpc::Status CoordinatorService::Register(grpc::ServerContext* ctx, const wire::RegisterRequest* req,
                                          wire::RegisterReply* reply) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (req->host().size() > in_.limits.max_host_bytes) {
    const std::string why = "host name of " + std::to_string(req->host().size()) + " bytes; at most " +
                            std::to_string(in_.limits.max_host_bytes) + " are accepted";
    Refuse(ctx->peer(), "registration_refused", {{"why", why}}, why);
    return Invalid(why);
  }
  std::string id;
  {
    std::lock_guard<std::mutex> lock(mu_);
    if (static_cast<int>(workers_.size()) < in_.limits.max_workers) {
      id = NewWorkerId(next_worker_++);
      WorkerView& w = workers_[id] = WorkerView{req->host(), "", 0, 0, 0, 0, Clock::now(),
                                                std::max(1, req->slots()), {}};
      HostWorkers& host = hosts_[w.host];
      host.workers.push_back(&w);
      ++host.idle;
    }
  }
  if (id.empty()) {
    const std::string why = "the coordinator has registered its limit of " +
                            std::to_string(in_.limits.max_workers) + " workers";
    Refuse(ctx->peer(), "registration_refused", {{"why", why}, {"host", req->host()}}, why);
    return grpc::Status(grpc::StatusCode::RESOURCE_EXHAUSTED, why);
  }
  reply->set_worker_id(id);
  reply->set_lease_seconds(in_.lease_seconds);
  dir_->LogEvent("worker_registered", {{"worker", id}, {"host", req->host()}, {"slots", req->slots()},
                                       {"pid", req->pid()}, {"peer", ctx->peer()}});
  return grpc::Status::OK;
}

grpc::Status CoordinatorService::Lease(grpc::ServerContext* ctx, const wire::LeaseRequest* req,
                                       wire::LeaseReply* reply) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (grpc::Status st = CheckRegistered(ctx, req->worker_id(), "Lease"); !st.ok()) return st;
  const std::optional<JobLease> lease = table_->Lease(req->worker_id(), Clock::now());
  if (!lease) {
    bool closed = false;
    {
      std::lock_guard<std::mutex> lock(mu_);
      closed = closed_;
    }
    reply->set_kind(closed && table_->AllSettled() ? wire::LeaseReply::DONE : wire::LeaseReply::WAIT);
    reply->set_retry_after_seconds(0.5);
    Seen(req->worker_id(), "", nullptr);
    std::lock_guard<std::mutex> lock(mu_);
    workers_[req->worker_id()].last_refused = Clock::now();
    return grpc::Status::OK;
  }
  reply->set_kind(wire::LeaseReply::JOB);
  reply->set_job_id(std::to_string(lease->job));
  reply->set_lease_id(lease->lease_id);
  const MemberSpec spec = Spec(lease->job);
  SpecToWire(spec, reply->mutable_spec());
  reply->set_data_hash(in_.data_hash);
  reply->set_config_hash(in_.config_hash);
  Seen(req->worker_id(), std::to_string(lease->job), nullptr);
  dir_->LogEvent("job_leased", {{"job", JobName(spec)}, {"worker", req->worker_id()},
                                {"attempt", lease->attempt}, {"lease", lease->lease_id}});
  return grpc::Status::OK;
}

grpc::Status CoordinatorService::Heartbeat(grpc::ServerContext* ctx, const wire::HeartbeatRequest* req,
                                           wire::HeartbeatReply* reply) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (grpc::Status st = CheckRegistered(ctx, req->worker_id(), "Heartbeat"); !st.ok()) return st;
  const int job = JobIndex(req->job_id());
  if (job < 0) return Invalid("unknown job " + req->job_id());
  reply->set_keep_going(table_->Renew(job, req->lease_id(), Clock::now()));
  Seen(req->worker_id(), req->job_id(), req);
  reply->set_extra_threads(ExtraThreads(req->worker_id()));
  return grpc::Status::OK;
}

int CoordinatorService::ExtraThreads(const std::string& worker) const {
  std::lock_guard<std::mutex> lock(mu_);
  const HostWorkers& host = hosts_.at(workers_.at(worker).host);
  if (host.idle == 0) return 0;
  const Clock::time_point fresh = Clock::now() - std::chrono::duration_cast<Clock::duration>(
                                                     std::chrono::duration<double>(kIdleFreshSeconds));
  int idle_slots = 0, busy = 0;
  for (const WorkerView* w : host.workers) {
    if (!w->job.empty()) ++busy;
    else if (w->last_refused >= fresh) idle_slots += w->slots;
  }
  return busy == 0 ? 0 : idle_slots / busy;
}

grpc::Status CoordinatorService::FetchData(grpc::ServerContext* ctx, const wire::FetchDataRequest* req,
                                           grpc::ServerWriter<wire::DataChunk>* writer) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (req->data_hash() != in_.data_hash) {
    return grpc::Status(grpc::StatusCode::NOT_FOUND, "no data set " + req->data_hash());
  }
  size_t offset = 0;
  do {
    wire::DataChunk chunk;
    if (offset == 0) {
      chunk.set_total_bytes(static_cast<int64_t>(in_.data_bytes.size()));
      chunk.set_sha256(data_sha_);
    }
    const size_t n = std::min(kChunkBytes, in_.data_bytes.size() - offset);
    chunk.set_payload(in_.data_bytes.substr(offset, n));
    offset += n;
    if (!writer->Write(chunk)) return grpc::Status(grpc::StatusCode::CANCELLED, "client went away");
  } while (offset < in_.data_bytes.size());
  return grpc::Status::OK;
}

grpc::Status CoordinatorService::CheckUploader(grpc::ServerContext* ctx, const wire::ResultChunk& header,
                                               int* job) {
  if (grpc::Status st = CheckRegistered(ctx, header.worker_id(), "UploadResult"); !st.ok()) return st;
  *job = JobIndex(header.job_id());
  if (*job < 0) return Invalid("unknown job " + header.job_id());
  if (table_->WasLeasedTo(*job, header.lease_id(), header.worker_id())) return grpc::Status::OK;
  const std::string why = "job " + header.job_id() + " was never leased to worker " + header.worker_id() +
                          " under lease " + std::to_string(header.lease_id());
  Refuse(ctx->peer(), "result_refused", {{"job", header.job_id()}, {"worker", header.worker_id()}, {"why", why}}, why);
  return grpc::Status(grpc::StatusCode::PERMISSION_DENIED, why);
}

grpc::Status CoordinatorService::UploadResult(grpc::ServerContext* ctx,
                                              grpc::ServerReader<wire::ResultChunk>* reader,
                                              wire::UploadReply* reply) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  const std::string peer = ctx->peer();
  std::unique_ptr<UploadSlots::Slot> slot = uploads_.Acquire([ctx] { ctx->TryCancel(); });
  if (!slot) {
    const std::string why = std::to_string(in_.limits.max_uploads) + " uploads are open already; retry later";
    Refuse(ctx->peer(), "upload_refused", {{"why", why}}, why);
    return grpc::Status(grpc::StatusCode::RESOURCE_EXHAUSTED, why);
  }
  ResultUpload upload(kMaxResultBytes);
  wire::ResultChunk chunk;
  int job = -1;
  while (reader->Read(&chunk)) {
    slot->Touch();
    if (Status st = upload.Add(chunk); !st.ok()) return Invalid(st.message());
    if (job < 0) {
      if (grpc::Status st = CheckUploader(ctx, upload.header(), &job); !st.ok()) return st;
    }
  }
  if (slot->cancelled_for_idling()) {
    const std::string why = "no chunk for " + NumberText(in_.limits.upload_idle_seconds) + " s";
    Refuse(peer, "upload_cancelled", {{"why", why}}, "upload cancelled: " + why);
    return grpc::Status(grpc::StatusCode::CANCELLED, "upload cancelled: " + why);
  }
  slot.reset();  // the stream is read: storing may take longer than the idle bound
  StatusOr<std::string> bytes = upload.Finish();
  if (!bytes.ok()) return Invalid(bytes.status().message());
  return Store(job, upload.header().worker_id(), upload.CpuSeconds(), bytes.value(), reply);
}

grpc::Status CoordinatorService::Store(int job, const std::string& worker,
                                       const std::optional<MemberResult::CpuSeconds>& cpu_seconds,
                                       const std::string& bytes, wire::UploadReply* reply) {
  const MemberSpec spec = Spec(job);
  const std::string source = "result of job " + JobName(spec) + " from " + worker;
  StatusOr<MemberResult> decoded = DecodeJobResult(bytes, source, in_.data_hash, in_.config_hash);
  if (!decoded.ok()) return Invalid(decoded.status().message());
  const MemberResult& r = decoded.value();
  if (r.index != spec.index || r.role != spec.role || r.point != spec.point || r.fold != spec.fold) {
    return Invalid(source + ": is the result of another job (" + JobRoleName(r.role) + ", member " +
                   std::to_string(r.index) + ")");
  }
  StatusOr<std::string> job_dir = dir_->JobDir(JobName(spec));
  if (!job_dir.ok()) return grpc::Status(grpc::StatusCode::INTERNAL, job_dir.status().message());
  const std::string path = job_dir.value() + "/result.pb";
  auto duplicate = [&] {
    StatusOr<std::string> first = ReadFileToString(path);
    const bool same = first.ok() && first.value() == bytes;
    reply->set_outcome(same ? wire::UploadReply::DUPLICATE_IDENTICAL : wire::UploadReply::DUPLICATE_DIFFERENT);
    dir_->LogEvent("duplicate_result", {{"job", JobName(spec)}, {"worker", worker}, {"identical", same}});
    return grpc::Status::OK;
  };
  if (table_->IsFinished(job)) return duplicate();
  // The file is complete before the table says finished; a racing upload of the same job writes
  // the same bytes (results are deterministic) and is then reported as a duplicate.
  const Status st = WriteFileAtomic(path, bytes);
  if (!st.ok()) return grpc::Status(grpc::StatusCode::INTERNAL, st.message());
  if (!table_->Finish(job)) return duplicate();
  reply->set_outcome(wire::UploadReply::ACCEPTED);
  Seen(worker, "", nullptr);
  nlohmann::json fields = {{"worker", worker}};
  if (cpu_seconds) fields["cpu_seconds"] = CpuSecondsJson(*cpu_seconds);
  dir_->LogJobEvent(spec, false, fields);
  return grpc::Status::OK;
}

grpc::Status CoordinatorService::ReportFailure(grpc::ServerContext* ctx, const wire::FailureRequest* req,
                                               wire::FailureReply*) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (grpc::Status st = CheckRegistered(ctx, req->worker_id(), "ReportFailure"); !st.ok()) return st;
  const int job = JobIndex(req->job_id());
  if (job < 0) return Invalid("unknown job " + req->job_id());
  const bool failed = table_->Fail(job, req->lease_id(), req->cause(), req->deterministic());
  Seen(req->worker_id(), "", nullptr);
  if (failed) {
    dir_->LogJobEvent(Spec(job), true, {{"worker", req->worker_id()}, {"cause", req->cause()}});
  } else {
    dir_->LogEvent("job_retry", {{"member", Spec(job).index}, {"job", JobName(Spec(job))},
                                 {"worker", req->worker_id()}, {"cause", req->cause()}});
  }
  return grpc::Status::OK;
}

grpc::Status CoordinatorService::ReturnLease(grpc::ServerContext* ctx, const wire::ReturnLeaseRequest* req,
                                             wire::ReturnLeaseReply*) {
  if (grpc::Status st = Authenticate(ctx); !st.ok()) return st;
  if (grpc::Status st = CheckRegistered(ctx, req->worker_id(), "ReturnLease"); !st.ok()) return st;
  const int job = JobIndex(req->job_id());
  if (job < 0) return Invalid("unknown job " + req->job_id());
  table_->Return(job, req->lease_id());
  Seen(req->worker_id(), "", nullptr);
  dir_->LogEvent("lease_returned", {{"job", JobName(Spec(job))}, {"worker", req->worker_id()}});
  return grpc::Status::OK;
}

std::map<std::string, WorkerView> CoordinatorService::Workers() const {
  std::lock_guard<std::mutex> lock(mu_);
  return workers_;
}

int CoordinatorService::RefusedCalls() const {
  std::lock_guard<std::mutex> lock(mu_);
  return refused_;
}

}  // namespace chorus

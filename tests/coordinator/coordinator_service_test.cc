// The coordinator's gRPC service against a client with bad intent, on loopback with an ephemeral
// port: results for jobs the uploader was never leased are refused (PERMISSION_DENIED, with a
// result_refused event) and never change the run's files; uploads that overrun their announced
// size or fail their SHA-256 are refused (INVALID_ARGUMENT); the honest worker's result is
// accepted and a repeat of it is reported as an identical duplicate. Worker ids cannot be guessed
// and calls under an id Register never gave are refused; registrations, host names and messages
// are bounded; a thousand idle upload streams and ten thousand wrong tokens neither starve the
// honest worker nor flood events.jsonl.
#include "coordinator/coordinator_service.h"

#include <grpcpp/grpcpp.h>
#include <gtest/gtest.h>

#include <atomic>
#include <filesystem>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <regex>
#include <set>
#include <sstream>
#include <thread>
#include <vector>

#include "common/sha256.h"
#include "proto/data_codec.h"
#include "proto/result_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace coordinator_service_test {

namespace fs = std::filesystem;

constexpr char kToken[] = "service-test-token-7c1e";
constexpr char kConfigHash[] = "service-test-config";

MemberSpec Spec(int index) { return testing::SmallMemberSpec(index, 11, 1, 32); }

class CoordinatorServiceTest : public ::testing::Test {
 protected:
  void SetUp() override {
    root_ = testing::MakeTempDir("chorus-service");
    data_ = testing::SmallClassificationData(3);
    data_.hash = std::string(64, 'a');
    StatusOr<RunDirectory> dir = RunDirectory::Create(root_, "service");
    ASSERT_TRUE(dir.ok()) << dir.status().ToString();
    dir_ = std::make_unique<RunDirectory>(std::move(dir).value());
    StartService(ServiceLimits{});
  }
  void TearDown() override {
    StopService();
    if (!HasFailure()) fs::remove_all(root_);
  }

  // A fresh service (empty registry and job table, jobs 0 and 1) with `limits`, served as
  // cluster_run.cc serves it; replaces any running one.
  void StartService(const ServiceLimits& limits) {
    StopService();
    table_ = std::make_unique<JobTable>(0, 3, 30.0);
    service_ = std::make_unique<CoordinatorService>(
        DispatchInputs{EncodePreparedData(data_), data_.hash, kConfigHash, 30.0, kToken, limits}, table_.get(),
        dir_.get());
    service_->AddJobs({Spec(0), Spec(1)});
    grpc::ServerBuilder builder;
    builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port_);
    builder.RegisterService(service_.get());
    builder.SetMaxReceiveMessageSize(kMaxReceiveMessageBytes);
    server_ = builder.BuildAndStart();
    ASSERT_NE(server_, nullptr);
    stub_ = NewStub();
  }
  // Stops the server now and destroys the service (which logs its last refusal summaries).
  void StopService() {
    if (server_) server_->Shutdown(std::chrono::system_clock::now());
    server_.reset();
    service_.reset();
  }

  // A stub on its own channel and TCP connection.
  std::unique_ptr<wire::Coordinator::Stub> NewStub() const {
    grpc::ChannelArguments args;
    args.SetInt(GRPC_ARG_USE_LOCAL_SUBCHANNEL_POOL, 1);
    return wire::Coordinator::NewStub(grpc::CreateCustomChannel(
        "127.0.0.1:" + std::to_string(port_), grpc::InsecureChannelCredentials(), args));
  }

  // A context with `token` and a 30 s deadline, so no call of a test can hang it.
  static std::unique_ptr<grpc::ClientContext> Context(const std::string& token = kToken) {
    auto ctx = std::make_unique<grpc::ClientContext>();
    ctx->AddMetadata("x-chorus-token", token);
    ctx->set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(30));
    return ctx;
  }

  std::string RegisterWorker(const std::string& host = "test-host", int slots = 1) {
    wire::RegisterRequest req;
    req.set_host(host);
    req.set_slots(slots);
    wire::RegisterReply reply;
    EXPECT_TRUE(stub_->Register(Context().get(), req, &reply).ok());
    return reply.worker_id();
  }

  wire::LeaseReply LeaseJob(const std::string& worker) {
    wire::LeaseRequest req;
    req.set_worker_id(worker);
    wire::LeaseReply reply;
    EXPECT_TRUE(stub_->Lease(Context().get(), req, &reply).ok());
    EXPECT_EQ(reply.kind(), wire::LeaseReply::JOB);
    return reply;
  }

  // The bytes an honest worker uploads for member `index`.
  std::string Result(int index) const {
    const StatusOr<MemberResult> r = TrainMember(Spec(index), data_, nullptr);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    return EncodeJobResult(r.value(), NetworkFor(Spec(index).model, data_).widths(), data_.hash, kConfigHash);
  }

  // Uploads `bytes` in two chunks, the first announcing `total` bytes and `sha`.
  grpc::Status Upload(const std::string& worker, const std::string& job, uint64_t lease,
                      const std::string& bytes, int64_t total, const std::string& sha,
                      wire::UploadReply* reply) {
    auto ctx = Context();
    std::unique_ptr<grpc::ClientWriter<wire::ResultChunk>> writer = stub_->UploadResult(ctx.get(), reply);
    wire::ResultChunk chunk;
    chunk.set_worker_id(worker);
    chunk.set_job_id(job);
    chunk.set_lease_id(lease);
    chunk.set_total_bytes(total);
    chunk.set_sha256(sha);
    const size_t half = bytes.size() / 2;
    chunk.set_payload(bytes.substr(0, half));
    writer->Write(chunk);
    wire::ResultChunk rest;
    rest.set_payload(bytes.substr(half));
    writer->Write(rest);
    writer->WritesDone();
    return writer->Finish();
  }

  std::string Events() const { return testing::ReadTextFile(dir_->File("events.jsonl")); }

  // The events of one kind, parsed.
  std::vector<nlohmann::json> EventsOf(const std::string& kind) const {
    std::vector<nlohmann::json> found;
    std::istringstream lines(Events());
    for (std::string line; std::getline(lines, line);) {
      nlohmann::json e = nlohmann::json::parse(line);
      if (e["event"] == kind) found.push_back(std::move(e));
    }
    return found;
  }

  std::string root_;
  PreparedData data_;
  std::unique_ptr<RunDirectory> dir_;
  std::unique_ptr<JobTable> table_;
  std::unique_ptr<CoordinatorService> service_;
  std::unique_ptr<grpc::Server> server_;
  int port_ = 0;
  std::unique_ptr<wire::Coordinator::Stub> stub_;
};

// A busy worker's heartbeat reply grants its job the slots of the workers on its host that asked
// for a job lately and found none queued, shared among the host's busy workers; not those of
// another host, of a worker that has only registered, or of one silent for kIdleFreshSeconds.
TEST_F(CoordinatorServiceTest, HeartbeatsGrantTheIdleSlotsOfTheSameHost) {
  const auto beat = [&](const std::string& worker, const wire::LeaseReply& lease) {
    wire::HeartbeatRequest req;
    req.set_worker_id(worker);
    req.set_job_id(lease.job_id());
    req.set_lease_id(lease.lease_id());
    wire::HeartbeatReply reply;
    EXPECT_TRUE(stub_->Heartbeat(Context().get(), req, &reply).ok());
    EXPECT_TRUE(reply.keep_going());
    return reply.extra_threads();
  };
  const auto ask_in_vain = [&](const std::string& worker) {
    wire::LeaseRequest req;
    req.set_worker_id(worker);
    wire::LeaseReply reply;
    EXPECT_TRUE(stub_->Lease(Context().get(), req, &reply).ok());
    EXPECT_EQ(reply.kind(), wire::LeaseReply::WAIT);
  };
  const std::string w1 = RegisterWorker(), w2 = RegisterWorker();
  const wire::LeaseReply job0 = LeaseJob(w1);
  EXPECT_EQ(beat(w1, job0), 0) << "job 1 is still queued";
  const wire::LeaseReply job1 = LeaseJob(w2);
  const std::string elsewhere = RegisterWorker("other-host", 4);
  ask_in_vain(elsewhere);
  EXPECT_EQ(beat(w1, job0), 0) << "another host's idle slots";
  const std::string w3 = RegisterWorker("test-host", 2);
  EXPECT_EQ(beat(w1, job0), 0) << "a worker that has not asked for a job yet";
  ask_in_vain(w3);
  EXPECT_EQ(beat(w1, job0), 1) << "two idle slots for two busy workers";
  EXPECT_EQ(beat(w2, job1), 1);
  std::this_thread::sleep_for(std::chrono::duration<double>(CoordinatorService::kIdleFreshSeconds + 0.2));
  EXPECT_EQ(beat(w1, job0), 0) << "the idle worker has not asked again";
}

TEST_F(CoordinatorServiceTest, AResultFromAWorkerThatWasNeverLeasedTheJobIsRefused) {
  const std::string honest = RegisterWorker(), hostile = RegisterWorker();
  const wire::LeaseReply lease = LeaseJob(honest);
  const std::string bytes = Result(lease.spec().index());
  const std::string sha = Sha256Hex(bytes.data(), bytes.size());
  const int64_t size = static_cast<int64_t>(bytes.size());
  wire::UploadReply reply;
  // The hostile worker claims the honest worker's job with its own id, then with the honest id
  // and a guessed lease id (lease ids are random), then a job nobody leased.
  for (const auto& [worker, job] : {std::pair{hostile, lease.job_id()}, std::pair{honest, lease.job_id()},
                                    std::pair{hostile, std::string("1")}}) {
    const grpc::Status st = Upload(worker, job, lease.lease_id() + 1, bytes, size, sha, &reply);
    EXPECT_EQ(st.error_code(), grpc::StatusCode::PERMISSION_DENIED) << worker << " job " << job;
    EXPECT_NE(st.error_message().find("was never leased to worker " + worker), std::string::npos)
        << st.error_message();
  }
  EXPECT_NE(Events().find("\"event\":\"result_refused\""), std::string::npos);
  EXPECT_FALSE(fs::exists(dir_->JobResultPath("0")));
  EXPECT_FALSE(fs::exists(dir_->JobResultPath("1")));
  EXPECT_EQ(table_->Count(JobState::kFinished), 0);

  ASSERT_TRUE(Upload(honest, lease.job_id(), lease.lease_id(), bytes, size, sha, &reply).ok());
  EXPECT_EQ(reply.outcome(), wire::UploadReply::ACCEPTED);
  EXPECT_EQ(testing::ReadTextFile(dir_->JobResultPath(std::to_string(lease.spec().index()))), bytes);
  ASSERT_TRUE(Upload(honest, lease.job_id(), lease.lease_id(), bytes, size, sha, &reply).ok());
  EXPECT_EQ(reply.outcome(), wire::UploadReply::DUPLICATE_IDENTICAL);
}

TEST_F(CoordinatorServiceTest, UploadsThatOverrunOrFailTheirChecksumAreRefused) {
  const std::string worker = RegisterWorker();
  const wire::LeaseReply lease = LeaseJob(worker);
  const std::string bytes = Result(lease.spec().index());
  const std::string sha = Sha256Hex(bytes.data(), bytes.size());
  const int64_t size = static_cast<int64_t>(bytes.size());
  wire::UploadReply reply;
  grpc::Status st = Upload(worker, lease.job_id(), lease.lease_id(), bytes, int64_t{5} << 30, sha, &reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(st.error_message().find("result too large"), std::string::npos) << st.error_message();
  st = Upload(worker, lease.job_id(), lease.lease_id(), bytes, size - 1, sha, &reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(st.error_message().find("more result bytes than"), std::string::npos) << st.error_message();
  std::string flipped = bytes;
  flipped[flipped.size() / 3] ^= 1;
  st = Upload(worker, lease.job_id(), lease.lease_id(), flipped, size, sha, &reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(st.error_message().find("incomplete or corrupted"), std::string::npos) << st.error_message();
  st = Upload(worker, "999", lease.lease_id(), bytes, size, sha, &reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_FALSE(fs::exists(dir_->JobResultPath(std::to_string(lease.spec().index()))));
  EXPECT_TRUE(Upload(worker, lease.job_id(), lease.lease_id(), bytes, size, sha, &reply).ok());
}

TEST_F(CoordinatorServiceTest, LeaseIdsAreUnpredictable) {
  JobTable table(200, 3, 30.0);
  std::set<uint64_t> ids;
  uint64_t previous = 0;
  int consecutive = 0;
  for (int i = 0; i < 200; ++i) {
    const std::optional<JobLease> lease = table.Lease("w1", Clock::now());
    ASSERT_TRUE(lease.has_value());
    ids.insert(lease->lease_id);
    consecutive += lease->lease_id == previous + 1;
    previous = lease->lease_id;
  }
  EXPECT_EQ(ids.size(), 200u);
  EXPECT_EQ(consecutive, 0) << "random 64-bit ids are not a counter";
}

TEST_F(CoordinatorServiceTest, WorkerIdsAreUnguessableAndCallsUnderUnregisteredIdsAreRefused) {
  const std::string honest = RegisterWorker(), other = RegisterWorker();
  const std::regex form("w[0-9]+-[0-9a-f]{16}");
  EXPECT_TRUE(std::regex_match(honest, form)) << honest;
  EXPECT_TRUE(std::regex_match(other, form)) << other;
  EXPECT_NE(honest.substr(honest.find('-')), other.substr(other.find('-')));
  const wire::LeaseReply lease = LeaseJob(honest);
  // The old counter form of an id, a near miss of a real one, nothing, and 1 MiB of bytes.
  const std::string near_miss = honest.substr(0, honest.size() - 1) + (honest.back() == '0' ? "1" : "0");
  for (const std::string& forged : {std::string("w1"), std::string("w2"), near_miss, std::string(),
                                    std::string(1 << 20, 'x')}) {
    SCOPED_TRACE(forged.substr(0, 20));
    const auto refused = [&](const grpc::Status& st) {
      EXPECT_EQ(st.error_code(), grpc::StatusCode::FAILED_PRECONDITION);
      EXPECT_NE(st.error_message().find("is not registered; register first"), std::string::npos)
          << st.error_message();
      EXPECT_LT(st.error_message().size(), 200u) << "a huge id is shown cut";
    };
    wire::LeaseRequest lease_req;
    lease_req.set_worker_id(forged);
    wire::LeaseReply lease_reply;
    refused(stub_->Lease(Context().get(), lease_req, &lease_reply));
    wire::HeartbeatRequest beat;
    beat.set_worker_id(forged);
    beat.set_job_id(lease.job_id());
    beat.set_lease_id(lease.lease_id());
    wire::HeartbeatReply beat_reply;
    refused(stub_->Heartbeat(Context().get(), beat, &beat_reply));
    wire::FailureRequest failure;
    failure.set_worker_id(forged);
    failure.set_job_id(lease.job_id());
    failure.set_lease_id(lease.lease_id());
    failure.set_deterministic(true);
    wire::FailureReply failure_reply;
    refused(stub_->ReportFailure(Context().get(), failure, &failure_reply));
    wire::ReturnLeaseRequest give_back;
    give_back.set_worker_id(forged);
    give_back.set_job_id(lease.job_id());
    give_back.set_lease_id(lease.lease_id());
    wire::ReturnLeaseReply give_back_reply;
    refused(stub_->ReturnLease(Context().get(), give_back, &give_back_reply));
    const std::string bytes = "x";
    wire::UploadReply upload_reply;
    refused(Upload(forged, lease.job_id(), lease.lease_id(), bytes, 1, Sha256Hex(bytes.data(), 1), &upload_reply));
  }
  const std::vector<nlohmann::json> unknown = EventsOf("worker_unknown");
  ASSERT_EQ(unknown.size(), 1u) << "one event per peer address and window";
  EXPECT_EQ(unknown[0]["call"], "Lease");
  EXPECT_EQ(unknown[0]["worker"], "\"w1\"");
  // Nothing the forged calls named changed: the honest lease is current and the job unfinished.
  EXPECT_EQ(table_->Snapshot()[std::stoi(lease.job_id())].state, JobState::kLeased);
  EXPECT_EQ(table_->Snapshot()[std::stoi(lease.job_id())].worker, honest);
  EXPECT_EQ(service_->Workers().size(), 2u) << "calls under unknown ids add no worker";
  const std::string bytes = Result(lease.spec().index());
  wire::UploadReply reply;
  ASSERT_TRUE(Upload(honest, lease.job_id(), lease.lease_id(), bytes, static_cast<int64_t>(bytes.size()),
                     Sha256Hex(bytes.data(), bytes.size()), &reply).ok());
  EXPECT_EQ(reply.outcome(), wire::UploadReply::ACCEPTED);
  StopService();
  const std::vector<nlohmann::json> summary = EventsOf("worker_unknown");
  ASSERT_EQ(summary.size(), 2u) << "the service's last word counts what went unlogged";
  EXPECT_EQ(summary[1]["unlogged"], 5 * 5 - 1);
  EXPECT_EQ(summary[1]["peer_address"], "127.0.0.1");
}

TEST_F(CoordinatorServiceTest, RegistrationsHostNamesAndMessagesAreBounded) {
  ServiceLimits limits;
  limits.max_workers = 3;
  StartService(limits);
  wire::RegisterRequest req;
  req.set_host(std::string(255, 'h'));
  std::set<std::string> ids;
  for (int i = 0; i < 3; ++i) {
    wire::RegisterReply reply;
    ASSERT_TRUE(stub_->Register(Context().get(), req, &reply).ok());
    ids.insert(reply.worker_id());
  }
  EXPECT_EQ(ids.size(), 3u);
  for (int i = 0; i < 3; ++i) {
    wire::RegisterReply reply;
    const grpc::Status st = stub_->Register(Context().get(), req, &reply);
    EXPECT_EQ(st.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED);
    EXPECT_NE(st.error_message().find("limit of 3 workers"), std::string::npos) << st.error_message();
  }
  req.set_host(std::string(256, 'h'));
  wire::RegisterReply reply;
  grpc::Status st = stub_->Register(Context().get(), req, &reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_NE(st.error_message().find("host name of 256 bytes; at most 255"), std::string::npos) << st.error_message();
  EXPECT_EQ(service_->Workers().size(), 3u);
  const std::vector<nlohmann::json> refused = EventsOf("registration_refused");
  ASSERT_EQ(refused.size(), 1u) << "one event per peer address and window";
  EXPECT_NE(refused[0]["why"].get<std::string>().find("limit of 3 workers"), std::string::npos);
  // A chunk over the 4 MiB message bound is refused by gRPC before any handler sees it.
  const std::string big(kMaxReceiveMessageBytes, 'b');
  wire::UploadReply upload_reply;
  st = Upload(*ids.begin(), "0", 1, big + big, 2 * static_cast<int64_t>(big.size()),
              Sha256Hex(big.data(), big.size()), &upload_reply);
  EXPECT_EQ(st.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED) << st.error_message();
}

// One stream of an attacker that opens uploads and sends nothing.
struct IdleUpload {
  std::unique_ptr<grpc::ClientContext> ctx;
  wire::UploadReply reply;
  std::unique_ptr<grpc::ClientWriter<wire::ResultChunk>> writer;
};

TEST_F(CoordinatorServiceTest, AThousandIdleUploadStreamsDoNotStarveAnHonestWorker) {
  ServiceLimits limits;
  limits.upload_idle_seconds = 1;
  StartService(limits);
  constexpr int kConnections = 10, kStreamsEach = 100;
  std::vector<std::unique_ptr<wire::Coordinator::Stub>> attackers;
  std::vector<IdleUpload> idle;
  for (int c = 0; c < kConnections; ++c) {
    attackers.push_back(NewStub());
    for (int i = 0; i < kStreamsEach; ++i) {
      IdleUpload u;
      u.ctx = Context();
      u.writer = attackers.back()->UploadResult(u.ctx.get(), &u.reply);
      idle.push_back(std::move(u));
    }
  }
  // Every slot is held or soon will be: the honest worker registers and leases at once, and its
  // upload, refused while the slots are held, goes through after a retry like chorus-worker's.
  const std::string honest = RegisterWorker();
  const wire::LeaseReply lease = LeaseJob(honest);
  const std::string bytes = Result(lease.spec().index());
  const std::string sha = Sha256Hex(bytes.data(), bytes.size());
  const auto give_up = std::chrono::steady_clock::now() + std::chrono::seconds(30);
  int busy = 0;
  grpc::Status st;
  wire::UploadReply reply;
  while (std::chrono::steady_clock::now() < give_up) {
    st = Upload(honest, lease.job_id(), lease.lease_id(), bytes, static_cast<int64_t>(bytes.size()), sha, &reply);
    if (st.error_code() != grpc::StatusCode::RESOURCE_EXHAUSTED) break;
    ++busy;
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
  }
  ASSERT_TRUE(st.ok()) << st.error_message();
  EXPECT_EQ(reply.outcome(), wire::UploadReply::ACCEPTED);
  EXPECT_EQ(testing::ReadTextFile(dir_->JobResultPath(std::to_string(lease.spec().index()))), bytes);
  // Each idle stream was refused at once or cancelled once idle past the bound.
  int refused = 0, cancelled = 0;
  for (IdleUpload& u : idle) {
    const grpc::Status end = u.writer->Finish();
    refused += end.error_code() == grpc::StatusCode::RESOURCE_EXHAUSTED;
    cancelled += end.error_code() == grpc::StatusCode::CANCELLED;
  }
  EXPECT_EQ(refused + cancelled, kConnections * kStreamsEach);
  EXPECT_GE(cancelled, limits.max_uploads);
  EXPECT_GE(refused, kConnections * kStreamsEach - 4 * limits.max_uploads);
  EXPECT_TRUE(testing::WaitFor([&] { return service_->UploadsOpen() == 0; }, 10));
  // A handful of events, not one per stream.
  EXPECT_GE(EventsOf("upload_refused").size(), 1u);
  ASSERT_GE(EventsOf("upload_cancelled").size(), 1u);
  // The peer as gRPC named it when the stream began ("unknown" when the stream was already
  // gone by then, as happens under a sanitizer's slowdown).
  const std::string peer = EventsOf("upload_cancelled")[0]["peer"].get<std::string>();
  EXPECT_TRUE(peer.rfind("ipv4:127.0.0.1:", 0) == 0 || peer == "unknown") << peer;
  EXPECT_LE(EventsOf("upload_refused").size() + EventsOf("upload_cancelled").size(), 10u) << busy;
}

TEST_F(CoordinatorServiceTest, TenThousandWrongTokensWriteOneEventAndTheHonestWorkerCarriesOn) {
  ServiceLimits limits;
  limits.refusal_window_seconds = 600;  // the whole test is one window
  StartService(limits);
  constexpr int kThreads = 4, kCallsEach = 2500;
  std::atomic<int> unauthenticated{0}, throttled{0};
  std::mutex other_mu;
  std::string other;  // the first answer that was not UNAUTHENTICATED, if any
  std::vector<std::thread> flood;
  for (int t = 0; t < kThreads; ++t) {
    flood.emplace_back([&] {
      const std::unique_ptr<wire::Coordinator::Stub> attacker = NewStub();
      wire::LeaseRequest req;
      req.set_worker_id("w1");
      for (int i = 0; i < kCallsEach; ++i) {
        wire::LeaseReply reply;
        // Waits for the connection rather than failing fast while a loaded machine accepts it.
        const std::unique_ptr<grpc::ClientContext> ctx = Context("wrong-token-" + std::to_string(i));
        ctx->set_wait_for_ready(true);
        const grpc::Status st = attacker->Lease(ctx.get(), req, &reply);
        unauthenticated += st.error_code() == grpc::StatusCode::UNAUTHENTICATED;
        throttled += st.error_message().find("throttled") != std::string::npos;
        if (st.error_code() != grpc::StatusCode::UNAUTHENTICATED) {
          std::lock_guard<std::mutex> lock(other_mu);
          if (other.empty()) other = std::to_string(st.error_code()) + " " + st.error_message();
        }
      }
    });
  }
  // The honest worker, from the same address, works through the flood.
  const std::string honest = RegisterWorker();
  const wire::LeaseReply lease = LeaseJob(honest);
  const std::string bytes = Result(lease.spec().index());
  wire::UploadReply reply;
  const grpc::Status st = Upload(honest, lease.job_id(), lease.lease_id(), bytes,
                                 static_cast<int64_t>(bytes.size()), Sha256Hex(bytes.data(), bytes.size()), &reply);
  for (std::thread& t : flood) t.join();
  ASSERT_TRUE(st.ok()) << st.error_message();
  EXPECT_EQ(reply.outcome(), wire::UploadReply::ACCEPTED);
  EXPECT_EQ(LeaseJob(honest).kind(), wire::LeaseReply::JOB);
  EXPECT_EQ(unauthenticated.load(), kThreads * kCallsEach) << other;
  EXPECT_EQ(throttled.load(), kThreads * kCallsEach - limits.max_token_failures);
  EXPECT_EQ(service_->RefusedCalls(), kThreads * kCallsEach);
  ASSERT_EQ(EventsOf("call_refused").size(), 1u);
  StopService();
  const std::vector<nlohmann::json> refused = EventsOf("call_refused");
  ASSERT_EQ(refused.size(), 2u);
  EXPECT_EQ(refused[0]["why"], "wrong token");
  EXPECT_EQ(refused[1]["unlogged"], kThreads * kCallsEach - 1) << "the summary adds up";
}

}  // namespace coordinator_service_test
}  // namespace chorus

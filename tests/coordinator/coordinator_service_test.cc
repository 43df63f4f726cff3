// The coordinator's gRPC service against a client with bad intent, on loopback with an ephemeral
// port: results for jobs the uploader was never leased are refused (PERMISSION_DENIED, with a
// result_refused event) and never change the run's files; uploads that overrun their announced
// size or fail their SHA-256 are refused (INVALID_ARGUMENT); the honest worker's result is
// accepted and a repeat of it is reported as an identical duplicate.
#include "coordinator/coordinator_service.h"

#include <grpcpp/grpcpp.h>
#include <gtest/gtest.h>

#include <filesystem>
#include <memory>
#include <set>

#include "common/sha256.h"
#include "proto/data_codec.h"
#include "proto/result_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace {

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
    table_ = std::make_unique<JobTable>(0, 3, 30.0);
    service_ = std::make_unique<CoordinatorService>(
        DispatchInputs{EncodePreparedData(data_), data_.hash, kConfigHash, 30.0, kToken}, table_.get(),
        dir_.get());
    service_->AddJobs({Spec(0), Spec(1)});
    grpc::ServerBuilder builder;
    int port = 0;
    builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port);
    builder.RegisterService(service_.get());
    server_ = builder.BuildAndStart();
    ASSERT_NE(server_, nullptr);
    stub_ = wire::Coordinator::NewStub(
        grpc::CreateChannel("127.0.0.1:" + std::to_string(port), grpc::InsecureChannelCredentials()));
  }
  void TearDown() override {
    server_->Shutdown();
    if (!HasFailure()) fs::remove_all(root_);
  }

  std::unique_ptr<grpc::ClientContext> Context() const {
    auto ctx = std::make_unique<grpc::ClientContext>();
    ctx->AddMetadata("x-chorus-token", kToken);
    return ctx;
  }

  std::string RegisterWorker() {
    wire::RegisterRequest req;
    req.set_host("test-host");
    req.set_slots(1);
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

  std::string root_;
  PreparedData data_;
  std::unique_ptr<RunDirectory> dir_;
  std::unique_ptr<JobTable> table_;
  std::unique_ptr<CoordinatorService> service_;
  std::unique_ptr<grpc::Server> server_;
  std::unique_ptr<wire::Coordinator::Stub> stub_;
};

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

}  // namespace
}  // namespace chorus

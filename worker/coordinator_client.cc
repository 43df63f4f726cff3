#include "worker/coordinator_client.h"

#include <grpcpp/grpcpp.h>

#include <algorithm>
#include <chrono>

#include "common/file_util.h"
#include "common/sha256.h"

namespace chorus {
namespace {

constexpr size_t kChunkBytes = 1 << 20;
constexpr double kCallSeconds = 30;
constexpr double kStreamSeconds = 3600;

StatusOr<std::shared_ptr<grpc::ChannelCredentials>> Credentials(const ConnectionOptions& o) {
  if (o.tls_ca.empty()) return grpc::InsecureChannelCredentials();
  grpc::SslCredentialsOptions ssl;
  CHORUS_ASSIGN_OR_RETURN(ssl.pem_root_certs, ReadFileToString(o.tls_ca, 1 << 20));
  if (!o.tls_cert.empty()) {
    CHORUS_ASSIGN_OR_RETURN(ssl.pem_cert_chain, ReadFileToString(o.tls_cert, 1 << 20));
    CHORUS_ASSIGN_OR_RETURN(ssl.pem_private_key, ReadFileToString(o.tls_key, 1 << 20));
  }
  return grpc::SslCredentials(ssl);
}

}  // namespace

Status FromGrpc(const grpc::Status& status, const std::string& call) {
  if (status.ok()) return Status::Ok();
  const std::string msg = call + ": " + status.error_message();
  switch (status.error_code()) {
    case grpc::StatusCode::UNAUTHENTICATED:
    case grpc::StatusCode::PERMISSION_DENIED:
    case grpc::StatusCode::INVALID_ARGUMENT:
      return Status::InvalidInput(msg);
    case grpc::StatusCode::UNAVAILABLE:
    case grpc::StatusCode::DEADLINE_EXCEEDED:
    case grpc::StatusCode::CANCELLED:
      return Status::Unavailable(msg);
    default:
      return Status::Internal(msg);
  }
}

StatusOr<std::unique_ptr<CoordinatorClient>> CoordinatorClient::Create(const ConnectionOptions& o) {
  CHORUS_ASSIGN_OR_RETURN(auto creds, Credentials(o));
  grpc::ChannelArguments args;
  args.SetMaxReceiveMessageSize(4 << 20);
  args.SetInt(GRPC_ARG_MAX_RECONNECT_BACKOFF_MS, 2000);
  auto channel = grpc::CreateCustomChannel(o.target, creds, args);
  return std::unique_ptr<CoordinatorClient>(
      new CoordinatorClient(wire::Coordinator::NewStub(channel), o.token));
}

std::unique_ptr<grpc::ClientContext> CoordinatorClient::Context(double seconds) const {
  auto ctx = std::make_unique<grpc::ClientContext>();
  ctx->AddMetadata("x-chorus-token", token_);
  ctx->set_deadline(std::chrono::system_clock::now() +
                    std::chrono::milliseconds(static_cast<int64_t>(seconds * 1000)));
  return ctx;
}

Status CoordinatorClient::Register(const wire::RegisterRequest& request, wire::RegisterReply* reply) {
  return FromGrpc(stub_->Register(Context(kCallSeconds).get(), request, reply), "Register");
}

Status CoordinatorClient::Lease(const wire::LeaseRequest& request, wire::LeaseReply* reply) {
  return FromGrpc(stub_->Lease(Context(kCallSeconds).get(), request, reply), "Lease");
}

Status CoordinatorClient::Heartbeat(const wire::HeartbeatRequest& request, wire::HeartbeatReply* reply) {
  return FromGrpc(stub_->Heartbeat(Context(kCallSeconds).get(), request, reply), "Heartbeat");
}

Status CoordinatorClient::ReportFailure(const wire::FailureRequest& request) {
  wire::FailureReply reply;
  return FromGrpc(stub_->ReportFailure(Context(kCallSeconds).get(), request, &reply), "ReportFailure");
}

Status CoordinatorClient::ReturnLease(const wire::ReturnLeaseRequest& request) {
  wire::ReturnLeaseReply reply;
  return FromGrpc(stub_->ReturnLease(Context(kCallSeconds).get(), request, &reply), "ReturnLease");
}

StatusOr<std::string> CoordinatorClient::FetchData(const std::string& hash, int64_t max_bytes) {
  auto ctx = Context(kStreamSeconds);
  wire::FetchDataRequest request;
  request.set_data_hash(hash);
  auto reader = stub_->FetchData(ctx.get(), request);
  wire::DataChunk chunk;
  std::string bytes, expected_sha;
  int64_t total = -1;
  while (reader->Read(&chunk)) {
    if (total < 0) {
      total = chunk.total_bytes();
      expected_sha = chunk.sha256();
      if (total < 0 || total > max_bytes) return Status::InvalidInput("FetchData: data set too large");
      bytes.reserve(static_cast<size_t>(total));
    }
    if (static_cast<int64_t>(bytes.size() + chunk.payload().size()) > total) {
      return Status::InvalidInput("FetchData: more bytes than announced");
    }
    bytes += chunk.payload();
  }
  CHORUS_RETURN_IF_ERROR(FromGrpc(reader->Finish(), "FetchData"));
  if (static_cast<int64_t>(bytes.size()) != total || Sha256Hex(bytes.data(), bytes.size()) != expected_sha) {
    return Status::Unavailable("FetchData: transfer incomplete or corrupted");
  }
  return bytes;
}

Status CoordinatorClient::UploadResult(const std::string& worker_id, const std::string& job_id,
                                       uint64_t lease_id, const std::string& bytes,
                                       wire::UploadReply* reply) {
  auto ctx = Context(kStreamSeconds);
  auto writer = stub_->UploadResult(ctx.get(), reply);
  size_t offset = 0;
  do {
    wire::ResultChunk chunk;
    if (offset == 0) {
      chunk.set_worker_id(worker_id);
      chunk.set_job_id(job_id);
      chunk.set_lease_id(lease_id);
      chunk.set_total_bytes(static_cast<int64_t>(bytes.size()));
      chunk.set_sha256(Sha256Hex(bytes.data(), bytes.size()));
    }
    const size_t n = std::min(kChunkBytes, bytes.size() - offset);
    chunk.set_payload(bytes.substr(offset, n));
    offset += n;
    if (!writer->Write(chunk)) break;
  } while (offset < bytes.size());
  writer->WritesDone();
  return FromGrpc(writer->Finish(), "UploadResult");
}

}  // namespace chorus

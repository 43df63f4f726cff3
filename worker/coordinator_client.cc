#include "worker/coordinator_client.h"

#include <google/protobuf/io/zero_copy_stream.h>
#include <grpcpp/grpcpp.h>

#include <algorithm>
#include <chrono>

#include "common/file_util.h"
#include "common/sha256.h"
#include "proto/result_upload.h"
#include "proto/spec_codec.h"

namespace chorus {
namespace {

constexpr double kCallSeconds = 30;
constexpr int kReceiveWindowBytes = 4 << 20;
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

// A FetchData response stream as a protobuf input stream: each chunk's payload in turn. Checks
// every chunk against the size announced in the first, hashes it and hands it to `on_bytes` as
// it arrives.
class ChunkStream : public google::protobuf::io::ZeroCopyInputStream {
 public:
  ChunkStream(std::unique_ptr<grpc::ClientReader<wire::DataChunk>> reader, int64_t max_bytes,
              const CoordinatorClient::BytesFn& on_bytes)
      : reader_(std::move(reader)), max_bytes_(max_bytes), on_bytes_(on_bytes) {}

  bool Next(const void** data, int* size) override {
    if (backed_up_ > 0) {
      *data = chunk_.payload().data() + chunk_.payload().size() - backed_up_;
      *size = backed_up_;
      position_ += backed_up_;
      backed_up_ = 0;
      return true;
    }
    while (error_.ok() && reader_->Read(&chunk_)) {
      if (!Accept()) return false;
      const std::string& payload = chunk_.payload();  // (Read may replace the string object)
      if (payload.empty()) continue;
      *data = payload.data();
      *size = static_cast<int>(payload.size());
      position_ += *size;
      return true;
    }
    drained_ = true;
    return false;
  }

  void BackUp(int count) override {
    backed_up_ = count;
    position_ -= count;
  }

  bool Skip(int count) override {
    const void* data = nullptr;
    int size = 0;
    while (count > 0) {
      if (!Next(&data, &size)) return false;
      if (size > count) {
        BackUp(size - count);
        return true;
      }
      count -= size;
    }
    return true;
  }

  int64_t ByteCount() const override { return position_; }

  // After the consumer is done: reads what it left (so that a corrupt transfer is told apart from
  // bad data), then checks the call's status, the size and the SHA-256.
  Status Finish(grpc::ClientContext* ctx) {
    if (!error_.ok()) ctx->TryCancel();
    while (!drained_ && reader_->Read(&chunk_)) {
      if (error_.ok()) Accept();
    }
    const grpc::Status call = reader_->Finish();
    CHORUS_RETURN_IF_ERROR(error_);
    CHORUS_RETURN_IF_ERROR(FromGrpc(call, "FetchData"));
    if (received_ != total_ || sha_.FinishHex() != expected_sha_) {
      return Status::Unavailable("FetchData: transfer incomplete or corrupted");
    }
    return Status::Ok();
  }

 private:
  // Checks, hashes and passes on the chunk just read; false (with error_ set) if it is refused.
  bool Accept() {
    if (total_ < 0) {
      total_ = chunk_.total_bytes();
      expected_sha_ = chunk_.sha256();
      if (total_ < 0 || total_ > max_bytes_) error_ = Status::InvalidInput("FetchData: data set too large");
    }
    const std::string& payload = chunk_.payload();
    if (error_.ok() && received_ + static_cast<int64_t>(payload.size()) > total_) {
      error_ = Status::InvalidInput("FetchData: more bytes than announced");
    }
    if (error_.ok() && on_bytes_) error_ = on_bytes_(payload);
    if (!error_.ok()) return false;
    received_ += static_cast<int64_t>(payload.size());
    sha_.Update(payload.data(), payload.size());
    return true;
  }

  std::unique_ptr<grpc::ClientReader<wire::DataChunk>> reader_;
  const int64_t max_bytes_;
  const CoordinatorClient::BytesFn& on_bytes_;
  wire::DataChunk chunk_;
  int backed_up_ = 0;      // bytes at the end of chunk_'s payload handed back by BackUp
  int64_t position_ = 0;   // bytes handed to the consumer, less those backed up
  bool drained_ = false;   // Read has returned false
  int64_t total_ = -1, received_ = 0;
  std::string expected_sha_;
  Sha256 sha_;
  Status error_;
};

}  // namespace

Status FromGrpc(const grpc::Status& status, const std::string& call) {
  if (status.ok()) return Status::Ok();
  const std::string msg = call + ": " + status.error_message();
  switch (status.error_code()) {
    case grpc::StatusCode::UNAUTHENTICATED:
    case grpc::StatusCode::PERMISSION_DENIED:
    case grpc::StatusCode::INVALID_ARGUMENT:
      return Status::InvalidInput(msg);
    case grpc::StatusCode::FAILED_PRECONDITION:
      return Status::Refused(msg);
    case grpc::StatusCode::UNAVAILABLE:
    case grpc::StatusCode::DEADLINE_EXCEEDED:
    case grpc::StatusCode::CANCELLED:
    case grpc::StatusCode::RESOURCE_EXHAUSTED:
      return Status::Unavailable(msg);
    default:
      return Status::Internal(msg);
  }
}

StatusOr<std::unique_ptr<CoordinatorClient>> CoordinatorClient::Create(const ConnectionOptions& o) {
  CHORUS_ASSIGN_OR_RETURN(auto creds, Credentials(o));
  grpc::ChannelArguments args;
  // A lease reply carries a warm-started member's weights (common/config.h start_points, 4 bytes
  // each); the coordinator refuses warm starts past kMaxLeaseReplyBytes.
  args.SetMaxReceiveMessageSize(kMaxLeaseReplyBytes);
  args.SetInt(GRPC_ARG_MAX_RECONNECT_BACKOFF_MS, 2000);
  // A fixed receive window instead of gRPC's bandwidth-delay probe, which grows the window so far
  // that tens of MiB of a FetchData stream sat in buffers ahead of the decoder (and stayed in the
  // heap after): the window bounds what is in flight; 4 MiB keeps a LAN or WAN link busy.
  args.SetInt(GRPC_ARG_HTTP2_BDP_PROBE, 0);
  args.SetInt(GRPC_ARG_HTTP2_STREAM_LOOKAHEAD_BYTES, kReceiveWindowBytes);
  if (o.own_connection) args.SetInt(GRPC_ARG_USE_LOCAL_SUBCHANNEL_POOL, 1);
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

Status CoordinatorClient::FetchData(const std::string& hash, int64_t max_bytes,
                                     const ConsumeFn& consume, const BytesFn& on_bytes) {
  auto ctx = Context(kStreamSeconds);
  wire::FetchDataRequest request;
  request.set_data_hash(hash);
  ChunkStream stream(stub_->FetchData(ctx.get(), request), max_bytes, on_bytes);
  const Status consumed = consume(&stream);
  CHORUS_RETURN_IF_ERROR(stream.Finish(ctx.get()));
  return consumed;
}

Status CoordinatorClient::UploadResult(const std::string& worker_id, const std::string& job_id,
                                       uint64_t lease_id, int64_t total_bytes,
                                       const std::string& sha256,
                                       const wire::JobCpuSeconds& cpu_seconds, const WriteResultFn& write,
                                       wire::UploadReply* reply) {
  auto ctx = Context(kStreamSeconds);
  auto writer = stub_->UploadResult(ctx.get(), reply);
  wire::ResultChunk chunk;
  chunk.set_worker_id(worker_id);
  chunk.set_job_id(job_id);
  chunk.set_lease_id(lease_id);
  chunk.set_total_bytes(total_bytes);
  chunk.set_sha256(sha256);
  *chunk.mutable_cpu_seconds() = cpu_seconds;
  bool header_sent = false;
  const bool written = write([&](const char* data, size_t n) {
    chunk.set_payload(data, n);
    if (!writer->Write(chunk)) return false;
    if (!header_sent) chunk.Clear();
    header_sent = true;
    return true;
  });
  if (written && !header_sent) writer->Write(chunk);  // no bytes at all: the header alone
  writer->WritesDone();
  const Status st = FromGrpc(writer->Finish(), "UploadResult");
  if (st.ok() && !written) return Status::Unavailable("UploadResult: the stream closed early");
  return st;
}

Status CoordinatorClient::UploadJobResult(const std::string& worker_id, const wire::LeaseReply& lease,
                                          const std::vector<int>& widths, const MemberResult& result,
                                          wire::UploadReply* reply) {
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
  return UploadResult(worker_id, lease.job_id(), lease.lease_id(), total, sha.FinishHex(),
                      CpuSecondsToWire(result.cpu_seconds), write, reply);
}

}  // namespace chorus

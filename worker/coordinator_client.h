// The worker's side of the protocol (proto/service.proto): one method per RPC, each turning
// grpc::Status into chorus::Status at this boundary. Every call sends the token as metadata and
// has a deadline. Thread safety: safe to share between the worker's slot threads (gRPC stubs are).
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "common/status.h"
#include "proto/result_codec.h"
#include "service.grpc.pb.h"

namespace google::protobuf::io {
class ZeroCopyInputStream;
}

namespace chorus {

struct ConnectionOptions {
  std::string target;     // HOST:PORT of the coordinator
  std::string token;      // the shared secret
  std::string tls_ca;     // PEM file of the CA to trust; empty = plaintext (loopback only)
  std::string tls_cert;   // optional client certificate and key (PEM files) for mutual TLS
  std::string tls_key;
  // A TCP connection of this client's own: gRPC otherwise shares one connection among all the
  // channels of a process to the same target. For simulating many workers in one process.
  bool own_connection = false;
};

class CoordinatorClient {
 public:
  // Builds the channel; a bad TLS file is kInvalidInput. Nothing is sent yet.
  static StatusOr<std::unique_ptr<CoordinatorClient>> Create(const ConnectionOptions& options);

  // kUnavailable when the coordinator cannot be reached or is busy (RESOURCE_EXHAUSTED, e.g. all
  // its upload slots are taken: retry later); kInvalidInput when it refused our token
  // (UNAUTHENTICATED: retrying cannot help); kRefused when it does not know our worker id
  // (FAILED_PRECONDITION: it was restarted since we registered, so register again).
  Status Register(const wire::RegisterRequest& request, wire::RegisterReply* reply);
  Status Lease(const wire::LeaseRequest& request, wire::LeaseReply* reply);
  Status Heartbeat(const wire::HeartbeatRequest& request, wire::HeartbeatReply* reply);
  Status ReportFailure(const wire::FailureRequest& request);
  Status ReturnLease(const wire::ReturnLeaseRequest& request);

  // Streams the data set with `hash` without holding it whole: `consume` reads the bytes, in
  // order and as they arrive, from the stream it is given (to the stream's end, or until it
  // fails); `on_bytes` (may be empty) sees every chunk of them first, e.g. to write a cache file.
  // The first chunk announces the size (at most `max_bytes`, else kInvalidInput) and SHA-256 of
  // the whole; if the bytes received do not match them (kUnavailable) or the call failed (its
  // status), FetchData fails whatever `consume` returned, so anything `consume` built must then
  // be dropped. Otherwise returns the first error of `on_bytes`, else `consume`'s status.
  using ConsumeFn = std::function<Status(google::protobuf::io::ZeroCopyInputStream* bytes)>;
  using BytesFn = std::function<Status(std::string_view bytes)>;
  Status FetchData(const std::string& hash, int64_t max_bytes, const ConsumeFn& consume,
                   const BytesFn& on_bytes);

  // Streams a result in chunks of at most kResultPieceBytes: `write` produces its bytes (exactly
  // `total_bytes` of them, with SHA-256 hex `sha256`) in order through the sink it is given, and
  // returns false if the sink refused a piece (the upload failed; its error is returned).
  // `cpu_seconds`, what training the job cost, rides on the first chunk.
  using WriteResultFn = std::function<bool(const ByteSink& sink)>;
  Status UploadResult(const std::string& worker_id, const std::string& job_id, uint64_t lease_id,
                      int64_t total_bytes, const std::string& sha256,
                      const wire::JobCpuSeconds& cpu_seconds, const WriteResultFn& write,
                      wire::UploadReply* reply);

  // UploadResult of `result` encoded for `lease` (proto/result_codec.h WriteJobResult): one
  // encoding pass for the size and SHA-256 the first chunk announces, a second into the stream,
  // so the result is never in memory twice. One attempt; retrying is the caller's choice.
  Status UploadJobResult(const std::string& worker_id, const wire::LeaseReply& lease,
                         const std::vector<int>& widths, const MemberResult& result,
                         wire::UploadReply* reply);

 private:
  CoordinatorClient(std::unique_ptr<wire::Coordinator::Stub> stub, std::string token)
      : stub_(std::move(stub)), token_(std::move(token)) {}
  // A context with the token and a deadline `seconds` from now.
  std::unique_ptr<grpc::ClientContext> Context(double seconds) const;

  std::unique_ptr<wire::Coordinator::Stub> stub_;
  std::string token_;
};

// grpc::Status -> chorus::Status, naming the call (the codes as listed above).
Status FromGrpc(const grpc::Status& status, const std::string& call);

}  // namespace chorus

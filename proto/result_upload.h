// Reassembling one result upload (service.proto UploadResult) from its chunks: the first chunk
// names the job and worker and announces the total size (at most max_bytes) and the SHA-256 of
// the whole; the payloads, in order, may never exceed the announced size; Finish checks size and
// hash. Bytes are held in memory only up to the announced size.
// Thread safety: one ResultUpload per stream, used by one thread.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

#include "common/member_training.h"
#include "common/status.h"
#include "service.pb.h"

namespace chorus {

// For the first chunk of an upload.
wire::JobCpuSeconds CpuSecondsToWire(const MemberResult::CpuSeconds& cpu);

class ResultUpload {
 public:
  explicit ResultUpload(int64_t max_bytes) : max_bytes_(max_bytes) {}

  // Adds the next chunk. Errors (kInvalidInput): the first chunk announces a negative size or
  // one over max_bytes, or the payloads so far exceed the announced size.
  Status Add(const wire::ResultChunk& chunk);

  // The announcing (first) chunk; default-valued before any chunk.
  const wire::ResultChunk& header() const { return header_; }

  // What the job cost the worker, as the first chunk says (not part of the result): null when it
  // says nothing, or gives a negative or non-finite value.
  std::optional<MemberResult::CpuSeconds> CpuSeconds() const;

  // The whole result. Errors (kInvalidInput): no chunk came, fewer bytes than announced, or
  // their SHA-256 differs from the announced one. Leaves the upload empty.
  StatusOr<std::string> Finish();

 private:
  const int64_t max_bytes_;
  bool started_ = false;
  wire::ResultChunk header_;
  std::string bytes_;
};

}  // namespace chorus

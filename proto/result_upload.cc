#include "proto/result_upload.h"

#include <cmath>
#include <utility>

#include "common/sha256.h"

namespace chorus {

wire::JobCpuSeconds CpuSecondsToWire(const MemberResult::CpuSeconds& cpu) {
  wire::JobCpuSeconds out;
  out.set_training(cpu.training);
  out.set_basin_fit(cpu.basin_fit);
  out.set_samples(cpu.samples);
  return out;
}

std::optional<MemberResult::CpuSeconds> ResultUpload::CpuSeconds() const {
  if (!header_.has_cpu_seconds()) return std::nullopt;
  const wire::JobCpuSeconds& w = header_.cpu_seconds();
  const MemberResult::CpuSeconds cpu{w.training(), w.basin_fit(), w.samples()};
  for (double v : {cpu.training, cpu.basin_fit, cpu.samples}) {
    if (!std::isfinite(v) || v < 0) return std::nullopt;
  }
  return cpu;
}

Status ResultUpload::Add(const wire::ResultChunk& chunk) {
  if (!started_) {
    header_ = chunk;
    header_.clear_payload();
    if (header_.total_bytes() < 0 || header_.total_bytes() > max_bytes_) {
      return Status::InvalidInput("result too large: " + std::to_string(header_.total_bytes()) +
                                  " bytes announced, at most " + std::to_string(max_bytes_));
    }
    bytes_.reserve(static_cast<size_t>(header_.total_bytes()));
    started_ = true;
  }
  if (static_cast<int64_t>(bytes_.size() + chunk.payload().size()) > header_.total_bytes()) {
    return Status::InvalidInput("more result bytes than the " + std::to_string(header_.total_bytes()) +
                                " announced");
  }
  bytes_ += chunk.payload();
  return Status::Ok();
}

StatusOr<std::string> ResultUpload::Finish() {
  std::string bytes = std::move(bytes_);
  bytes_.clear();
  if (!started_) return Status::InvalidInput("empty upload: no chunk came");
  if (static_cast<int64_t>(bytes.size()) != header_.total_bytes() ||
      Sha256Hex(bytes.data(), bytes.size()) != header_.sha256()) {
    return Status::InvalidInput("result transfer incomplete or corrupted");
  }
  return bytes;
}

}  // namespace chorus

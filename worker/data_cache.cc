#include "worker/data_cache.h"

#include <filesystem>

#include "common/file_util.h"
#include "proto/data_codec.h"

namespace chorus {
namespace {

constexpr int64_t kMaxDataBytes = int64_t{16} << 30;

bool IsHexHash(const std::string& h) {
  return h.size() == 64 && h.find_first_not_of("0123456789abcdef") == std::string::npos;
}

}  // namespace

StatusOr<std::shared_ptr<const PreparedData>> DataCache::Get(const std::string& hash) {
  std::lock_guard<std::mutex> lock(mu_);
  auto it = loaded_.find(hash);
  if (it != loaded_.end()) return it->second;
  CHORUS_ASSIGN_OR_RETURN(std::shared_ptr<const PreparedData> data, Load(hash));
  loaded_[hash] = data;
  return data;
}

StatusOr<std::shared_ptr<const PreparedData>> DataCache::Load(const std::string& hash) {
  if (!IsHexHash(hash)) return Status::InvalidInput("data hash is not a SHA-256 hex string");
  const std::string path = cache_dir_.empty() ? "" : cache_dir_ + "/" + hash + ".data";
  if (!path.empty() && std::filesystem::exists(path)) {
    StatusOr<std::string> bytes = ReadFileToString(path, kMaxDataBytes);
    if (bytes.ok()) {
      StatusOr<PreparedData> data = DecodePreparedData(bytes.value(), path, hash);
      if (data.ok()) return std::make_shared<const PreparedData>(std::move(data).value());
    }
  }
  CHORUS_ASSIGN_OR_RETURN(std::string bytes, client_->FetchData(hash, kMaxDataBytes));
  CHORUS_ASSIGN_OR_RETURN(PreparedData data, DecodePreparedData(bytes, "fetched data", hash));
  if (!path.empty()) {
    CHORUS_RETURN_IF_ERROR(MakeDirectories(cache_dir_));
    CHORUS_RETURN_IF_ERROR(WriteFileAtomic(path, bytes));
  }
  return std::make_shared<const PreparedData>(std::move(data));
}

}  // namespace chorus

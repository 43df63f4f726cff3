#include "worker/data_cache.h"

#include <fcntl.h>
#include <google/protobuf/io/zero_copy_stream_impl.h>
#include <unistd.h>

#include <filesystem>

#include "common/atomic_file.h"
#include "common/file_util.h"
#include "common/log_format.h"
#include "proto/data_codec.h"

namespace chorus {
namespace {

constexpr int64_t kMaxDataBytes = int64_t{16} << 30;
constexpr int kFileBlockBytes = 1 << 20;

bool IsHexHash(const std::string& h) {
  return h.size() == 64 && h.find_first_not_of("0123456789abcdef") == std::string::npos;
}

// Decodes a cache file as it is read, so that memory is the decoded data plus one block.
StatusOr<PreparedData> ReadCacheFile(const std::string& path, const std::string& hash) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return Status::Io(path + ": cannot open");
  google::protobuf::io::FileInputStream in(fd, kFileBlockBytes);
  in.SetCloseOnDelete(true);
  return DecodePreparedData(&in, path, hash);
}

// Says which data set a job trains on and how much memory it takes (bench/worker_memory.sh reads
// data_bytes from this line).
void LogReady(const PreparedData& d, const std::string& from) {
  const int64_t bytes = PreparedDataBytes(d);
  const int64_t rows = d.train.rows() + d.validation.rows() + d.test.rows();
  char text[200];
  std::snprintf(text, sizeof text, "chorus-worker: data set %.12s from %s: %lld rows x %lld features, %.1f MiB",
                d.hash.c_str(), from.c_str(), static_cast<long long>(rows),
                static_cast<long long>(d.features()), static_cast<double>(bytes) / 1048576.0);
  LogLine(stderr, LogLevel::kInfo, text,
          {{"data_hash", d.hash}, {"source", from}, {"rows", rows}, {"features", d.features()},
           {"data_bytes", bytes}});
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
    StatusOr<PreparedData> data = ReadCacheFile(path, hash);  // a bad file is fetched again
    if (data.ok()) {
      LogReady(data.value(), "the disk cache");
      return std::make_shared<const PreparedData>(std::move(data).value());
    }
  }
  // The disk copy is only a cache: if it cannot be written (full disk, file size limit), the
  // worker says so and goes on with the data in memory; the temporary file is removed.
  std::unique_ptr<AtomicFile> file;
  const auto give_up_caching = [&](const Status& why) {
    LogLine(stderr, LogLevel::kWarning, "chorus-worker: not caching the data on disk: " + why.ToString(),
            {{"cause", why.ToString()}});
    file.reset();
  };
  if (!path.empty()) {
    StatusOr<std::unique_ptr<AtomicFile>> created = Status::Internal("not created");
    const Status made = MakeDirectories(cache_dir_);
    if (made.ok()) created = AtomicFile::Create(path);
    if (made.ok() && created.ok()) {
      file = std::move(created).value();
    } else {
      give_up_caching(made.ok() ? created.status() : made);
    }
  }
  StatusOr<PreparedData> data = Status::Internal("FetchData did not decode");
  const auto decode = [&](google::protobuf::io::ZeroCopyInputStream* bytes) {
    data = DecodePreparedData(bytes, "fetched data", hash);
    return data.status();
  };
  const auto keep = [&](std::string_view bytes) {
    if (file) {
      if (const Status st = file->Append(bytes); !st.ok()) give_up_caching(st);
    }
    return Status::Ok();
  };
  CHORUS_RETURN_IF_ERROR(client_->FetchData(hash, kMaxDataBytes, decode, keep));
  if (file) {
    if (const Status st = file->Commit(); !st.ok()) give_up_caching(st);
  }
  LogReady(data.value(), "the coordinator");
  return std::make_shared<const PreparedData>(std::move(data).value());
}

}  // namespace chorus

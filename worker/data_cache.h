// Prepared data sets a worker has seen, by content hash: in memory, on disk (cache_dir/HASH.data,
// written atomically), or fetched from the coordinator. Thread safety: Get is safe to call from
// several slot threads; one fetch per hash at a time.
#pragma once

#include <map>
#include <memory>
#include <mutex>
#include <string>

#include "common/prepared_data.h"
#include "worker/coordinator_client.h"

namespace chorus {

class DataCache {
 public:
  DataCache(CoordinatorClient* client, std::string cache_dir)
      : client_(client), cache_dir_(std::move(cache_dir)) {}

  // The data set with `hash`; errors from the fetch or a corrupt cache file (which is replaced).
  StatusOr<std::shared_ptr<const PreparedData>> Get(const std::string& hash);

 private:
  StatusOr<std::shared_ptr<const PreparedData>> Load(const std::string& hash);

  CoordinatorClient* client_;
  const std::string cache_dir_;
  std::mutex mu_;
  std::map<std::string, std::shared_ptr<const PreparedData>> loaded_;  // guarded by mu_
};

}  // namespace chorus

// The prepared data as bytes (data.proto), for sending to workers and caching on their disks.
// Only what training needs travels: features, labels/targets, names, task, hash and target
// scaling; preprocessing statistics and row origins stay with the coordinator.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include "common/dataset.h"
#include "common/status.h"

namespace chorus {

constexpr uint32_t kDataFormatVersion = 1;

std::string EncodePreparedData(const PreparedData& data);

// Errors (kInvalidInput naming `source`): not a data set, other format version, sizes that do not
// match, a hash other than `expected_hash` (when non-empty).
StatusOr<PreparedData> DecodePreparedData(const std::string& bytes, const std::string& source,
                                          const std::string& expected_hash);

}  // namespace chorus

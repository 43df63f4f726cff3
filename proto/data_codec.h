// The prepared data as bytes (data.proto), for sending to workers and caching on their disks.
// Only what training needs travels: features, labels/targets, names, task, hash and target
// scaling; preprocessing statistics and row origins stay with the coordinator.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <string>

#include "common/prepared_data.h"
#include "common/status.h"

namespace google::protobuf::io {
class ZeroCopyInputStream;
}

namespace chorus {

constexpr uint32_t kDataFormatVersion = 1;

std::string EncodePreparedData(const PreparedData& data);

// Errors (kInvalidInput naming `source`): not a data set, other format version, sizes that do not
// match, a hash other than `expected_hash` (when non-empty).
StatusOr<PreparedData> DecodePreparedData(const std::string& bytes, const std::string& source,
                                          const std::string& expected_hash);

// The same decoding, reading the encoded bytes from `in` as they come (a network stream, a file)
// and copying each split's feature bytes straight into its matrix: memory is the decoded data
// plus the stream's own buffer, never the whole encoded set besides. Reads `in` to its end (or
// to the first error). The same errors as above; a stream that ends early is "not a data set".
StatusOr<PreparedData> DecodePreparedData(google::protobuf::io::ZeroCopyInputStream* in,
                                          const std::string& source,
                                          const std::string& expected_hash);

// Bytes the decoded data occupies in memory: every split's features (rows x features float32)
// plus its labels (int32) and targets (float32). Names and the hash are not counted.
int64_t PreparedDataBytes(const PreparedData& data);

}  // namespace chorus

// The bundle file (bundle.chorus): magic bytes, format version, payload length, a Protobuf
// chorus.bundle.Bundle payload, and the payload's SHA-256 as 64 hex digits (byte layout:
// docs/bundle_format.md).
// Reading verifies the magic, the version, the length against the file size and the checksum
// before parsing anything, then checks the parsed bundle (CheckBundle, common/bundle.h) before
// returning it. Every size read is bounded; a file over kMaxBundleFileBytes is refused before it
// is read. Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "common/bundle.h"
#include "common/status.h"

namespace chorus {

constexpr uint32_t kBundleFormatVersion = 1;
constexpr int64_t kBundleHeaderBytes = 20;    // magic (8) + version (4) + payload length (8)
constexpr int64_t kBundleChecksumBytes = 64;  // SHA-256 of the payload, lowercase hex
constexpr int64_t kMaxBundlePayloadBytes = (int64_t{1} << 31) - 1;  // Protobuf's message limit
constexpr int64_t kMaxBundleFileBytes =
    kBundleHeaderBytes + kMaxBundlePayloadBytes + kBundleChecksumBytes;

// A bundle as read from a file, with the facts of its frame.
struct BundleFile {
  uint32_t format_version = 0;
  int64_t payload_bytes = 0;
  std::string payload_sha256;  // lowercase hex, verified
  Bundle bundle;
};

// The whole file's bytes. Deterministic: the same bundle gives the same bytes. Requires a bundle
// whose payload fits kMaxBundlePayloadBytes (CheckBundle's limits do not guarantee it).
std::string EncodeBundleFile(const Bundle& bundle);

// Encodes and writes atomically (temp file + rename). Errors: kIo naming the path; kInternal if
// the payload would exceed kMaxBundlePayloadBytes.
Status WriteBundleFile(const std::string& path, const Bundle& bundle);

// Verifies and decodes a whole file held in memory. Errors are kInvalidInput naming `source`:
// short or truncated file, bad magic, another format version, trailing bytes, checksum mismatch,
// a payload that is not a bundle message, or a bundle CheckBundle refuses.
StatusOr<BundleFile> DecodeBundleFile(std::string_view bytes, const std::string& source);

// Reads `path` and decodes it as DecodeBundleFile does, releasing the file bytes before the
// bundle is built. A missing file or one over kMaxBundleFileBytes is kInvalidInput.
StatusOr<BundleFile> ReadBundleFile(const std::string& path);

}  // namespace chorus

// Reading IDX files (the MNIST family's format: big-endian magic 0x0000TTDD with element type TT
// and dimension count DD, DD big-endian uint32 sizes, then the elements, row-major), plain or gzip
// (detected by the 0x1f 0x8b magic). Thread safety: free functions, reentrant.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "common/status.h"

namespace chorus {

// Bytes per element of IDX type code `type` (0x08, 0x09: 1; 0x0B: 2; 0x0C, 0x0D: 4; 0x0E: 8), or
// 0 for an unknown code.
size_t IdxElementBytes(uint8_t type);

// The big-endian uint32 at p (IDX header fields).
uint32_t IdxBigEndian32(const uint8_t* p);

struct IdxArray {
  std::vector<int64_t> dims;  // e.g. {60000, 28, 28} for images, {60000} for labels
  std::vector<float> values;  // all elements converted to float, row-major, product(dims) long
};

// Parses IDX bytes (already decompressed). Errors (kInvalidInput, naming `path`): bad magic,
// unknown type code, fewer bytes than the header promises, trailing bytes, a dimension of zero,
// more than 2^31 elements in total.
StatusOr<IdxArray> ParseIdx(const std::vector<uint8_t>& bytes, const std::string& path);

// Reads a plain or gzip-compressed IDX file.
StatusOr<IdxArray> ReadIdx(const std::string& path);

}  // namespace chorus

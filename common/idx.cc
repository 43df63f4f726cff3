#include "common/idx.h"

#include <zlib.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <exception>
#include <limits>

#include "common/huge_pages.h"

namespace chorus {

uint32_t IdxBigEndian32(const uint8_t* p) {
  return (uint32_t{p[0]} << 24) | (uint32_t{p[1]} << 16) | (uint32_t{p[2]} << 8) | p[3];
}

size_t IdxElementBytes(uint8_t type) {
  switch (type) {
    case 0x08:
    case 0x09:
      return 1;
    case 0x0B:
      return 2;
    case 0x0C:
    case 0x0D:
      return 4;
    case 0x0E:
      return 8;
    default:
      return 0;
  }
}

namespace {

constexpr int64_t kMaxElements = int64_t{1} << 31;
constexpr size_t kReadChunk = size_t{1} << 20;
constexpr size_t kLongestHeader = 4 + 4 * 255;

// What the first 4 + 4 * DD bytes of an IDX file promise.
struct IdxHeader {
  uint8_t type = 0;
  size_t element_bytes = 0;
  std::vector<int64_t> dims;
  int64_t elements = 1;
  size_t header_bytes = 0;
  size_t total_bytes() const {
    return header_bytes + static_cast<size_t>(elements) * element_bytes;
  }
};


uint64_t BigEndian64(const uint8_t* p) {
  return (uint64_t{IdxBigEndian32(p)} << 32) | IdxBigEndian32(p + 4);
}


std::string Hex(uint32_t value, int digits) {
  char text[16];
  std::snprintf(text, sizeof text, "0x%0*x", digits, static_cast<unsigned>(value));
  return text;
}

std::string DimsText(const std::vector<int64_t>& dims) {
  std::string text;
  for (int64_t d : dims) text += (text.empty() ? "" : "x") + std::to_string(d);
  return text;
}

Status ParseDims(const std::vector<uint8_t>& bytes, const std::string& path, IdxHeader* h) {
  for (size_t i = 0; i < h->dims.size(); ++i) {
    const size_t offset = 4 + 4 * i;
    h->dims[i] = IdxBigEndian32(&bytes[offset]);
    if (h->dims[i] == 0) {
      return Status::InvalidInput(path + ": byte " + std::to_string(offset) +
                                  ": expected a size "
                                  "of at least 1 for dimension " +
                                  std::to_string(i) + ", found 0");
    }
    h->elements *= h->dims[i];
    if (h->elements > kMaxElements) {
      return Status::InvalidInput(path + ": the header promises more than 2^31 elements (dims " +
                                  DimsText(h->dims) + "...), the most chorus reads");
    }
  }
  return Status::Ok();
}

StatusOr<IdxHeader> ParseHeader(const std::vector<uint8_t>& bytes, const std::string& path) {
  if (bytes.empty()) return Status::InvalidInput(path + ": file is empty");
  if (bytes.size() < 4) {
    return Status::InvalidInput(path + ": expected a 4-byte IDX magic number, found " +
                                std::to_string(bytes.size()) + " bytes");
  }
  if (bytes[0] != 0 || bytes[1] != 0) {
    return Status::InvalidInput(path + ": byte 0: expected the IDX magic 0x0000TTDD, found " +
                                Hex(IdxBigEndian32(bytes.data()), 8) + " (is this an IDX file?)");
  }
  IdxHeader h;
  h.type = bytes[2];
  h.element_bytes = IdxElementBytes(h.type);
  if (h.element_bytes == 0) {
    return Status::InvalidInput(path +
                                ": byte 2: expected an IDX type code (0x08, 0x09, 0x0b, "
                                "0x0c, 0x0d or 0x0e), found " +
                                Hex(h.type, 2));
  }
  if (bytes[3] == 0) {
    return Status::InvalidInput(path + ": byte 3: expected at least 1 dimension, found 0");
  }
  h.dims.resize(bytes[3]);
  h.header_bytes = 4 + 4 * h.dims.size();
  if (bytes.size() < h.header_bytes) {
    return Status::InvalidInput(path + ": expected a " + std::to_string(h.header_bytes) +
                                "-byte header for " + std::to_string(h.dims.size()) +
                                " dimensions, found " + std::to_string(bytes.size()) + " bytes");
  }
  CHORUS_RETURN_IF_ERROR(ParseDims(bytes, path, &h));
  return h;
}

Status CheckLength(const IdxHeader& h, size_t length, const std::string& path) {
  const size_t expected = h.total_bytes();
  const auto bytes = [](size_t n, const char* noun) {
    return std::to_string(n) + " " + noun + (n == 1 ? "" : "s");
  };
  const std::string promise = "the header promises " + std::to_string(h.elements) + " element" +
                              (h.elements == 1 ? "" : "s") + " (dims " + DimsText(h.dims) +
                              ") in " + bytes(expected - h.header_bytes, "byte") + " after the " +
                              std::to_string(h.header_bytes) + "-byte header";
  if (length < expected) {
    return Status::InvalidInput(path + ": truncated: " + promise + ", found " +
                                bytes(length - h.header_bytes, "byte"));
  }
  if (length > expected) {
    return Status::InvalidInput(path + ": byte " + std::to_string(expected) + ": " + promise +
                                ", found " + bytes(length - expected, "trailing byte"));
  }
  return Status::Ok();
}

// Converts n big-endian elements of IDX type `type` at p to float.
void Decode(uint8_t type, const uint8_t* p, int64_t n, float* out) {
  for (int64_t i = 0; i < n; ++i) {
    switch (type) {
      case 0x08:
        out[i] = p[i];
        break;
      case 0x09:
        out[i] = static_cast<int8_t>(p[i]);
        break;
      case 0x0B:
        out[i] = static_cast<int16_t>((p[2 * i] << 8) | p[2 * i + 1]);
        break;
      case 0x0C:
        out[i] = static_cast<float>(static_cast<int32_t>(IdxBigEndian32(p + 4 * i)));
        break;
      case 0x0D: {
        const uint32_t bits = IdxBigEndian32(p + 4 * i);
        std::memcpy(&out[i], &bits, 4);
        break;
      }
      default: {  // 0x0E
        const uint64_t bits = BigEndian64(p + 8 * i);
        double value;
        std::memcpy(&value, &bits, 8);
        out[i] = static_cast<float>(value);
      }
    }
  }
}

// How many bytes are worth reading given what has been read: one past what the header promises
// (enough to see trailing bytes without inflating an arbitrarily long stream), or everything
// while the header is still incomplete, or nothing more once the header is known to be bad.
size_t ReadLimit(const std::vector<uint8_t>& bytes, const std::string& path) {
  if (bytes.size() < kLongestHeader) return std::numeric_limits<size_t>::max();
  StatusOr<IdxHeader> header = ParseHeader(bytes, path);
  return header.ok() ? header.value().total_bytes() + 1 : bytes.size();
}

// Reads a file through zlib, which recognises gzip by its 0x1f 0x8b magic and inflates it, and
// reads any other file unchanged.
StatusOr<std::vector<uint8_t>> ReadMaybeGzip(const std::string& path) {
  gzFile file = gzopen(path.c_str(), "rb");
  if (file == nullptr) {
    return Status::InvalidInput(path + ": cannot open file: " + std::strerror(errno));
  }
  std::vector<uint8_t> bytes;
  size_t limit = std::numeric_limits<size_t>::max();
  while (bytes.size() < limit) {
    const size_t old_size = bytes.size();
    const size_t size = old_size + std::min(kReadChunk, limit - old_size);
    // Grows by doubling as bytes arrive (a header's size is not trusted for more), never past
    // what the header promises, each new buffer on huge pages.
    if (size > bytes.capacity()) ReserveOnHugePages(&bytes, std::min(limit, std::max(size, 2 * bytes.capacity())));
    bytes.resize(size);
    const int got = gzread(file, bytes.data() + old_size, bytes.size() - old_size);
    bytes.resize(old_size + std::max(got, 0));
    if (got <= 0) break;
    limit = ReadLimit(bytes, path);
  }
  const int read_errno = errno;
  int error = Z_OK;
  const std::string message = gzerror(file, &error);
  gzclose(file);
  if (error == Z_ERRNO) {
    return Status::InvalidInput(path + ": cannot read file: " + std::strerror(read_errno));
  }
  if (error != Z_OK) return Status::InvalidInput(path + ": bad gzip data: " + message);
  return bytes;
}

StatusOr<IdxArray> ParseIdxUnchecked(const std::vector<uint8_t>& bytes, const std::string& path) {
  CHORUS_ASSIGN_OR_RETURN(const IdxHeader h, ParseHeader(bytes, path));
  CHORUS_RETURN_IF_ERROR(CheckLength(h, bytes.size(), path));
  IdxArray array;
  array.dims = h.dims;
  ReserveOnHugePages(&array.values, static_cast<size_t>(h.elements));
  array.values.resize(static_cast<size_t>(h.elements));
  Decode(h.type, bytes.data() + h.header_bytes, h.elements, array.values.data());
  return array;
}

}  // namespace

StatusOr<IdxArray> ParseIdx(const std::vector<uint8_t>& bytes, const std::string& path) {
  try {
    return ParseIdxUnchecked(bytes, path);
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

StatusOr<IdxArray> ReadIdx(const std::string& path) {
  try {
    CHORUS_ASSIGN_OR_RETURN(const std::vector<uint8_t> bytes, ReadMaybeGzip(path));
    return ParseIdxUnchecked(bytes, path);
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

}  // namespace chorus

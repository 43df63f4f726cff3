#include "common/idx_reader.h"

#include <zlib.h>

#include <algorithm>
#include <cerrno>
#include <cstring>

#include "common/idx.h"

namespace chorus {
namespace {


// One big-endian element of IDX type `type` at p, as float (ReadIdx's conversion).
float DecodeElement(uint8_t type, const uint8_t* p) {
  switch (type) {
    case 0x08:
      return p[0];
    case 0x09:
      return static_cast<int8_t>(p[0]);
    case 0x0B:
      return static_cast<int16_t>((p[0] << 8) | p[1]);
    case 0x0C:
      return static_cast<float>(static_cast<int32_t>(IdxBigEndian32(p)));
    case 0x0D: {
      const uint32_t bits = IdxBigEndian32(p);
      float value;
      std::memcpy(&value, &bits, 4);
      return value;
    }
    default: {  // 0x0E
      const uint64_t bits = (uint64_t{IdxBigEndian32(p)} << 32) | IdxBigEndian32(p + 4);
      double value;
      std::memcpy(&value, &bits, 8);
      return static_cast<float>(value);
    }
  }
}

}  // namespace

StatusOr<std::unique_ptr<IdxReader>> IdxReader::Open(const std::string& path) {
  gzFile file = gzopen(path.c_str(), "rb");
  if (file == nullptr) {
    return Status::InvalidInput(path + ": cannot open file: " + std::strerror(errno));
  }
  std::unique_ptr<IdxReader> reader(new IdxReader(file, path));
  CHORUS_RETURN_IF_ERROR(reader->ReadHeader());
  return reader;
}

IdxReader::~IdxReader() { gzclose(file_); }

Status IdxReader::ReadExactly(size_t bytes, uint8_t* out, const std::string& what) {
  size_t done = 0;
  while (done < bytes) {
    const int got = gzread(file_, out + done, static_cast<unsigned>(bytes - done));
    if (got <= 0) break;
    done += static_cast<size_t>(got);
  }
  int error = Z_OK;
  const char* message = gzerror(file_, &error);
  if (error != Z_OK && error != Z_BUF_ERROR) {
    return Status::InvalidInput(path_ + ": cannot read " + what + ": " + message);
  }
  if (done < bytes) {
    return Status::InvalidInput(path_ + ": truncated: the file ends inside " + what);
  }
  return Status::Ok();
}

Status IdxReader::ReadHeader() {
  uint8_t magic[4];
  CHORUS_RETURN_IF_ERROR(ReadExactly(4, magic, "the 4-byte IDX magic number"));
  type_ = magic[2];
  element_bytes_ = IdxElementBytes(type_);
  if (magic[0] != 0 || magic[1] != 0 || element_bytes_ == 0 || magic[3] == 0) {
    return Status::InvalidInput(path_ +
                                ": byte 0: expected the IDX magic 0x0000TTDD with a type "
                                "code TT and at least one dimension (is this an IDX file?)");
  }
  std::vector<uint8_t> sizes(4 * size_t{magic[3]});
  CHORUS_RETURN_IF_ERROR(ReadExactly(sizes.size(), sizes.data(), "the header's sizes"));
  for (size_t i = 0; i < magic[3]; ++i) {
    dims_.push_back(IdxBigEndian32(&sizes[4 * i]));
    if (dims_.back() == 0) {
      return Status::InvalidInput(path_ + ": byte " + std::to_string(4 + 4 * i) +
                                  ": expected a size of at least 1 for dimension " +
                                  std::to_string(i) + ", found 0");
    }
    if (i > 0) row_elements_ *= dims_.back();
    if (row_elements_ > kMaxRowElements) {
      return Status::InvalidInput(path_ + ": more than " + std::to_string(kMaxRowElements) +
                                  " elements per row, the most chorus reads");
    }
  }
  return Status::Ok();
}

Status IdxReader::CheckNoTrailingBytes() {
  uint8_t extra;
  if (gzread(file_, &extra, 1) <= 0) return Status::Ok();
  return Status::InvalidInput(path_ + ": trailing bytes after the " + std::to_string(rows()) +
                              " rows the header promises");
}

StatusOr<int64_t> IdxReader::Read(int64_t max_rows, float* out) {
  const int64_t n = std::min(max_rows, rows() - next_row_);
  row_bytes_.resize(static_cast<size_t>(row_elements_) * element_bytes_);  // once: first read
  for (int64_t r = 0; r < n; ++r, ++next_row_) {
    CHORUS_RETURN_IF_ERROR(
        ReadExactly(row_bytes_.size(), row_bytes_.data(), "row " + std::to_string(next_row_)));
    float* row = out + r * row_elements_;
    for (int64_t j = 0; j < row_elements_; ++j) {
      row[j] = DecodeElement(type_, &row_bytes_[static_cast<size_t>(j) * element_bytes_]);
    }
  }
  if (n > 0 && next_row_ == rows()) CHORUS_RETURN_IF_ERROR(CheckNoTrailingBytes());
  return n;
}

}  // namespace chorus

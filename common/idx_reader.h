// Reading the rows of an IDX file (the MNIST family's format, common/idx.h; plain or gzip) a
// batch at a time with bounded memory: row r is the r-th slice along the first dimension, its
// elements flattened row-major and converted to float as ReadIdx converts them.
// Thread safety: an IdxReader is used by one thread at a time.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "common/status.h"

struct gzFile_s;  // zlib's gzFile, kept out of this header

namespace chorus {

class IdxReader {
 public:
  static constexpr int64_t kMaxRowElements = int64_t{1} << 24;

  // Opens `path` and reads its header. Errors (kInvalidInput, naming the path and byte): cannot
  // open, bad magic or type code, no dimensions, a zero dimension, more than kMaxRowElements
  // elements per row.
  static StatusOr<std::unique_ptr<IdxReader>> Open(const std::string& path);
  ~IdxReader();
  IdxReader(const IdxReader&) = delete;
  IdxReader& operator=(const IdxReader&) = delete;

  const std::string& path() const { return path_; }
  int64_t rows() const { return dims_[0]; }
  int64_t RowElements() const { return row_elements_; }
  int64_t next_row() const { return next_row_; }

  // Reads up to max_rows further rows into out (max_rows x RowElements() floats, row-major);
  // returns how many were read, 0 at the end. Errors (kInvalidInput): the file ends before the
  // rows the header promises, or holds bytes after them (checked with the last row), or the
  // gzip data is bad.
  StatusOr<int64_t> Read(int64_t max_rows, float* out);

 private:
  IdxReader(gzFile_s* file, std::string path) : file_(file), path_(std::move(path)) {}
  Status ReadHeader();
  Status ReadExactly(size_t bytes, uint8_t* out, const std::string& what);
  Status CheckNoTrailingBytes();

  gzFile_s* file_;
  std::string path_;
  uint8_t type_ = 0;
  size_t element_bytes_ = 0;
  std::vector<int64_t> dims_;
  int64_t row_elements_ = 1;
  int64_t next_row_ = 0;
  std::vector<uint8_t> row_bytes_;  // one row's bytes, allocated by the first Read
};

}  // namespace chorus

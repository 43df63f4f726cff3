// Reading the inputs of `chorus predict` (a CSV file, or an IDX images file) a batch at a time
// with bounded memory, validating each row and encoding it with a bundle's preprocessing
// (common/feature_encoder.h, the code path training used).
// Thread safety: an InputReader is used by one thread at a time.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

enum class InputFormat {
  kAuto,  // IDX if the file (or its gzip content) starts with two zero bytes, else CSV
  kCsv,   // header row naming the bundle's columns, in any order; other columns are ignored
  kIdx,   // images file, one row per slice of the first dimension; plain or gzip
};

struct InputBatch {
  Matrix x;                  // rows x features, standardised
  std::vector<int64_t> ids;  // per row: the CSV line its record starts on, or the IDX row index
};

// Called with the problem of each row that fails validation ("FILE:LINE:COLUMN: ..." or
// "FILE[ROW]: ..."). Returning ok skips the row; returning an error stops the reading with it.
using BadRowFn = std::function<Status(const Status& problem)>;

class InputReader {
 public:
  // Opens `path` for a bundle with preprocessing `p` (which must outlive the reader).
  // Errors (kInvalidInput): the file cannot be opened or has a bad header; a CSV header lacks a
  // column the bundle needs; an IDX row's element count differs from the bundle's features, or
  // the bundle has categorical columns.
  static StatusOr<std::unique_ptr<InputReader>> Open(const std::string& path, InputFormat format,
                                                     const Preprocessing& p);
  virtual ~InputReader() = default;

  // What InputBatch::ids count: "line" (CSV) or "index" (IDX).
  virtual const char* IdName() const = 0;

  // Replaces *batch with the next up to max_rows valid rows, in file order, passing each invalid
  // row to on_bad_row. Returns false, with an empty batch, once the input is exhausted. Errors:
  // on_bad_row's, or a file-level failure (read error, truncated IDX, oversized CSV record).
  virtual StatusOr<bool> Next(int64_t max_rows, const BadRowFn& on_bad_row, InputBatch* batch) = 0;
};

}  // namespace chorus

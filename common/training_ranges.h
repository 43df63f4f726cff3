// Which rows of new data lie far outside the training data, from a bundle's training summary
// (common/training_summary.h): a numeric value more than half the training range beyond the
// training minimum or maximum (for a column that was constant in training: any other value,
// beyond float rounding), or a categorical value training never saw. A file whose header names
// its columns in another order than its values, for example, puts most rows outside.
// Thread safety: a TrainingRanges is immutable after For() and may be shared between threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/matrix.h"

namespace chorus {

constexpr double kRangeMargin = 0.5;  // allowed beyond the training range, a fraction of its width

// What one batch held outside the ranges.
struct RangeFindings {
  int64_t rows = 0;                   // rows with at least one column outside
  std::vector<int64_t> first_rows;    // their positions in the batch, the first few
  std::vector<int64_t> column_rows;   // per plan column: rows where it is outside
};

class TrainingRanges {
 public:
  // Requires: `bundle` has a non-empty training summary matching its feature plan (CheckBundle).
  static TrainingRanges For(const Bundle& bundle);

  // Checks every row of `x` (rows x features, standardised with the bundle's standardizer, as
  // prediction inputs are); keeps up to `first` flagged row positions.
  RangeFindings Check(const Matrix& x, size_t first) const;

  size_t Columns() const { return columns_.size(); }
  const std::string& ColumnName(size_t column) const { return columns_[column].name; }
  // "motor_temp_c (training range [41.2, 88.9])" or "station (a value training never saw)".
  std::string Describe(size_t column) const;

 private:
  struct Column {
    std::string name;
    bool categorical = false;
    int64_t first_feature = 0;
    int64_t features = 1;           // categorical: vocabulary size
    double min = 0, max = 0;        // numeric: the training range
    double low = 0, high = 0;       // numeric: accepted values
  };
  std::vector<Column> columns_;
  std::vector<float> mean_, scale_;  // the standardizer, to return to raw units
};

}  // namespace chorus

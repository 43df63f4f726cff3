// Turning one input row into the network's features with preprocessing fitted on the training
// split: the one code path shared by training (common/dataset.h) and prediction
// (common/prediction_input.h), so a row encodes to the same floats in both.
// Thread safety: plain values and reentrant free functions; a CsvRowEncoder is immutable after
// ForHeader and may be shared read-only between threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/status.h"

namespace chorus {

// Per-feature standardisation fitted on the training split only: x' = (x - mean) / scale, where
// scale is the population standard deviation, or 1 where that is below 1e-12. One-hot features
// are standardised like every other feature. Both vectors hold one entry per feature.
struct Standardizer {
  std::vector<float> mean;
  std::vector<float> scale;
};

// A categorical CSV column and its one-hot vocabulary from the training split (sorted, distinct).
// A value not in the vocabulary encodes as all zeros.
struct CategoricalColumn {
  std::string name;
  std::vector<std::string> vocabulary;
};

// How raw input columns become features, in the training file's column order (the target
// excluded): a numeric column gives its value, a categorical column one 0/1 feature per
// vocabulary entry. IDX data has one numeric column per element, named x0, x1, ...
struct FeaturePlan {
  struct Column {
    std::string name;
    bool categorical = false;
    // Numeric: position among the numeric columns. Categorical: index into `categorical`.
    int64_t index = 0;
  };
  std::vector<Column> columns;
  std::vector<CategoricalColumn> categorical;

  int64_t Features() const;
  int64_t NumericColumns() const;
  // One name per feature: the column name, or "column=value" for a one-hot feature.
  std::vector<std::string> FeatureNames() const;
  // Per column, the index of its first feature (a categorical column's features follow it).
  std::vector<int64_t> FirstFeatures() const;
};

// Reads a whole field as a finite double within float range (|value| <= 3.4e38), independent of
// the locale. Surrounding spaces and tabs and a leading '+' are allowed. Errors (kInvalidInput)
// start with `place` and name `column`.
Status ParseNumber(const std::string& field, const std::string& place, const std::string& column,
                   double* value);

// Writes one row's features, before standardisation, to out[0 .. plan.Features()).
// numeric: plan.NumericColumns() values; categories: one value per plan.categorical entry
// (may be null when the plan has no categorical columns). Instantiated for float and double.
template <typename Scalar>
void EncodeRow(const FeaturePlan& plan, const Scalar* numeric,
               const std::vector<std::string>* categories, double* out);

// out_j = float((row_j - mean_j) / scale_j) for j < s.mean.size(), computed in double from the
// stored float statistics, so that training and prediction give the same floats. Error
// (kInvalidInput, "PLACE: ..."): a value so far from the training data that it standardises
// beyond float range (|out_j| > 3.4e38), naming the feature; `out` is then partly written.
Status StandardizeRow(const FeaturePlan& plan, const Standardizer& s, const double* row,
                      const std::string& place, float* out);

// Encodes CSV records whose header may order columns differently from training, hold extra
// columns (ignored) and hold or lack the target column (ignored either way).
class CsvRowEncoder {
 public:
  // Finds every plan column in `header`; `plan` and `s` must outlive the encoder.
  // Errors (kInvalidInput, "header_place: ..."): a plan column missing from the header.
  static StatusOr<CsvRowEncoder> ForHeader(const FeaturePlan& plan, const Standardizer& s,
                                           const std::vector<std::string>& header,
                                           const std::string& header_place);

  // Writes the standardised features of one record (header.size() fields) to out (Features()
  // floats). Errors (kInvalidInput, "line_place:COLUMN: ..."): a field that is not a finite
  // number in a numeric column. `out` is unspecified on error.
  Status Encode(const std::vector<std::string>& fields, const std::string& line_place,
                float* out) const;

  int64_t Features() const { return features_; }

 private:
  CsvRowEncoder(const FeaturePlan& plan, const Standardizer& s)
      : plan_(&plan), standardizer_(&s), features_(plan.Features()) {}

  const FeaturePlan* plan_;
  const Standardizer* standardizer_;
  int64_t features_;
  std::vector<int64_t> field_of_column_;  // plan column k sits in field field_of_column_[k]
};

}  // namespace chorus

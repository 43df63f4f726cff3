// Internal to data loading (common/dataset.cc and the loaders it calls): the rows of the data
// files as read, before the split and preprocessing. Callers outside it use LoadPreparedData.
// Thread safety: plain values.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/feature_encoder.h"

namespace chorus {

// One file's rows before the split. Scalar is double for CSV, so values keep their precision
// until standardisation, and float for IDX, the IDX reader's own element type.
template <typename Scalar>
struct RawRows {
  std::vector<Scalar> numeric;  // rows x numeric_cols, row-major
  int64_t numeric_cols = 0;
  std::vector<std::vector<std::string>> categories;  // rows x categorical columns (CSV only)
  std::vector<std::string> labels;                   // classification: the label's text
  std::vector<double> targets;                       // regression: the target as read
  std::vector<std::string> origin;                   // "file:line" or "file[index]"
  std::vector<std::string> label_place;              // where each label sits, for messages
  int64_t rows() const { return static_cast<int64_t>(origin.size()); }
};

// Some rows of one RawRows, in this order.
template <typename Scalar>
struct RowSet {
  const RawRows<Scalar>* raw = nullptr;
  std::vector<int64_t> rows;
};

// Every file's rows, and where validation comes from.
template <typename Scalar>
struct RawData {
  RawRows<Scalar> train, validation, test;
  bool validation_from_file = false;
  std::string train_file;
  FeaturePlan plan;
};

}  // namespace chorus

// Loading, validating, splitting and preprocessing the data a run trains and evaluates on.
// Thread safety: free functions, reentrant; PreparedData is immutable once built and may be
// shared read-only between threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/feature_encoder.h"
#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

// One split after preprocessing. x is rows x features (row-major). Classification fills labels
// (class index in [0, class_names.size())); regression fills targets (standardised with the
// train mean/std in PreparedData). origin[i] says where row i came from ("file:line" or
// "file[index]"), for messages and prediction output.
struct Split {
  Matrix x;
  std::vector<int32_t> labels;
  std::vector<float> targets;
  std::vector<std::string> origin;
  int64_t rows() const { return x.rows(); }
};

struct PreparedData {
  Task task = Task::kClassification;
  std::vector<std::string> feature_names;   // after one-hot expansion ("site=north")
  std::vector<std::string> class_names;     // classification: sorted labels seen in train
  FeaturePlan plan;                         // raw columns -> features, with the train vocabularies
  Standardizer standardizer;
  float target_mean = 0.0f;                 // regression: y' = (y - target_mean) / target_scale
  float target_scale = 1.0f;
  Split train, validation, test;
  // k-fold cross-fitting (common/folds.h): validation is empty and every train row is held out
  // by one fold's jobs. 0: validation is a holdout or a file. Not part of the hash.
  int folds = 0;
  std::string hash;                         // SHA-256 (hex) of everything above except origin
  int64_t features() const { return train.x.cols(); }
  int64_t classes() const { return static_cast<int64_t>(class_names.size()); }
};

// Loads the files named in `config`, validates them, splits off validation (a seeded fraction of
// train, shuffled with a generator derived from `run_seed`, or the given file; none when
// cross-fitting, ResolvedFolds > 0, which sets `folds`), fits the
// standardizer and vocabularies on the remaining train rows, and applies them to every split.
// Held-out validation: Fisher-Yates over the train row indices with
// Philox(Derive(run_seed, "validation")); the first max(1, round(fraction * n)) indices become
// validation. Both validation and the remaining train rows keep their original file order.
// max_train_rows / max_test_rows keep the first N rows of a file, before the split.
// CSV features are the train header's columns except the target, in header order; validation and
// test files are matched by column name (extra columns are ignored). IDX features are each row's
// elements flattened row-major, named x0, x1, ...
// Errors (kInvalidInput, message "FILE:LINE:COLUMN: ..." for CSV, "FILE[ROW]: ..." or
// "FILE: byte B: ..." for IDX): empty file, ragged row, non-numeric value in a numeric column,
// NaN/inf, empty class label, missing target or categorical column, fewer than 2 classes in
// train, a validation or test label never seen in train, IDX header/size mismatch, images/labels
// count mismatch, a bad format or validation fraction in `config`.
StatusOr<PreparedData> LoadPreparedData(const DataConfig& config, uint64_t run_seed);

// Reads data.true_probabilities: rows x classes matrix whose header must equal class_names (in
// any order; columns are reordered to class_names) and whose row count must equal test rows.
// Every value must be a number in [0, 1]; errors name FILE:LINE:COLUMN (kInvalidInput).
StatusOr<Matrix> LoadTrueProbabilities(const std::string& path, const PreparedData& data);

}  // namespace chorus

// The data a run trains and evaluates on, as LoadPreparedData (common/dataset.h) builds it: three
// standardised splits and the preprocessing fitted on train, to apply to new inputs the same way.
// Thread safety: PreparedData is immutable once built and may be shared read-only between threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/feature_encoder.h"
#include "common/matrix.h"

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

}  // namespace chorus

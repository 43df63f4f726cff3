#include "common/idx_dataset.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <utility>

#include "common/feature_encoder.h"
#include "common/idx.h"
#include "common/message_text.h"
#include "common/preprocessing.h"
#include "common/raw_rows.h"

namespace chorus {
namespace {

Status CheckIdxPair(const IdxFiles& files, const IdxArray& images, const IdxArray& labels) {
  if (labels.dims.size() != 1) {
    return Status::InvalidInput(files.labels + ": expected a 1-dimensional labels file, found " +
                                std::to_string(labels.dims.size()) + " dimensions");
  }
  if (images.dims[0] != labels.dims[0]) {
    return Status::InvalidInput(files.images + ": holds " + std::to_string(images.dims[0]) +
                                " rows but " + files.labels + " holds " +
                                std::to_string(labels.dims[0]) + " labels; expected equal counts");
  }
  return Status::Ok();
}

Status CheckFinite(const RawRows<float>& raw, const std::string& file) {
  const auto bad = std::find_if(raw.numeric.begin(), raw.numeric.end(),
                                [](float v) { return !std::isfinite(v); });
  if (bad == raw.numeric.end()) return Status::Ok();
  const int64_t at = bad - raw.numeric.begin();
  return Status::InvalidInput(file + "[" + std::to_string(at / raw.numeric_cols) +
                              "]: expected finite values, found " + NumberText(*bad) +
                              " at element " + std::to_string(at % raw.numeric_cols));
}

Status AddIdxTarget(float value, const std::string& place, Task task, RawRows<float>* raw) {
  const bool is_label =
      std::isfinite(value) && value == std::nearbyint(value) && std::fabs(value) <= 2147483647.0f;
  if (!std::isfinite(value) || (task == Task::kClassification && !is_label)) {
    return Status::InvalidInput(
        place + ": expected " +
        (task == Task::kClassification ? "an integer class label" : "a finite target") +
        ", found " + NumberText(value));
  }
  if (task == Task::kClassification) {
    raw->labels.push_back(std::to_string(static_cast<int64_t>(value)));
  } else {
    raw->targets.push_back(value);
  }
  return Status::Ok();
}

StatusOr<RawRows<float>> IdxRows(const IdxFiles& files, Task task, int64_t max_rows) {
  CHORUS_ASSIGN_OR_RETURN(IdxArray images, ReadIdx(files.images));
  CHORUS_ASSIGN_OR_RETURN(const IdxArray labels, ReadIdx(files.labels));
  CHORUS_RETURN_IF_ERROR(CheckIdxPair(files, images, labels));
  const int64_t n = max_rows > 0 ? std::min(max_rows, images.dims[0]) : images.dims[0];
  RawRows<float> raw;
  raw.numeric_cols = static_cast<int64_t>(images.values.size()) / images.dims[0];
  images.values.resize(static_cast<size_t>(n * raw.numeric_cols));
  raw.numeric = std::move(images.values);
  CHORUS_RETURN_IF_ERROR(CheckFinite(raw, files.images));
  for (int64_t i = 0; i < n; ++i) {
    const std::string index = "[" + std::to_string(i) + "]";
    raw.origin.push_back(files.images + index);
    raw.label_place.push_back(files.labels + index);
    CHORUS_RETURN_IF_ERROR(AddIdxTarget(labels.values[i], raw.label_place.back(), task, &raw));
  }
  return raw;
}

Status CheckSameWidth(const RawRows<float>& train, const RawRows<float>& other,
                      const std::string& file) {
  if (other.numeric_cols == train.numeric_cols) return Status::Ok();
  return Status::InvalidInput(file + ": expected " + std::to_string(train.numeric_cols) +
                              " values per row like the training images, found " +
                              std::to_string(other.numeric_cols));
}

FeaturePlan IdxPlan(int64_t width) {
  FeaturePlan plan;
  for (int64_t j = 0; j < width; ++j) plan.columns.push_back({"x" + std::to_string(j), false, j});
  return plan;
}

}  // namespace

StatusOr<PreparedData> LoadIdxData(const DataConfig& config, uint64_t run_seed) {
  RawData<float> raw;
  raw.train_file = config.train_idx.images;
  CHORUS_ASSIGN_OR_RETURN(raw.train, IdxRows(config.train_idx, config.task, config.max_train_rows));
  if (!config.validation_idx.images.empty()) {
    CHORUS_ASSIGN_OR_RETURN(raw.validation, IdxRows(config.validation_idx, config.task, 0));
    CHORUS_RETURN_IF_ERROR(CheckSameWidth(raw.train, raw.validation, config.validation_idx.images));
    raw.validation_from_file = true;
  }
  CHORUS_ASSIGN_OR_RETURN(raw.test, IdxRows(config.test_idx, config.task, config.max_test_rows));
  CHORUS_RETURN_IF_ERROR(CheckSameWidth(raw.train, raw.test, config.test_idx.images));
  raw.plan = IdxPlan(raw.train.numeric_cols);
  return Preprocess(raw, config, run_seed);
}

}  // namespace chorus

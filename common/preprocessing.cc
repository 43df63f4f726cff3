#include "common/preprocessing.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <set>
#include <string>
#include <unordered_map>
#include <utility>
#include <vector>

#include "common/data_hash.h"
#include "common/feature_encoder.h"
#include "common/folds.h"
#include "common/holdout.h"
#include "common/huge_pages.h"
#include "common/message_text.h"

namespace chorus {
namespace {

constexpr double kMinScale = 1e-12;  // a standard deviation below this counts as 0

bool ParseInteger(const std::string& text, int64_t* value) {
  const char* end = text.data() + text.size();
  const auto [ptr, error] = std::from_chars(text.data(), end, *value);
  return !text.empty() && error == std::errc() && ptr == end;
}

// ---- turning rows into standardised features ----

// Writes row r's features, unstandardised, to out[0 .. plan.Features()).
template <typename Scalar>
void EncodeRawRow(const RawRows<Scalar>& raw, int64_t r, const FeaturePlan& plan, double* out) {
  const std::vector<std::string>* categories =
      raw.categories.empty() ? nullptr : &raw.categories[r];
  EncodeRow(plan, raw.numeric.data() + r * raw.numeric_cols, categories, out);
}

// Sets each categorical column's vocabulary to the sorted distinct values in `train`.
template <typename Scalar>
void FillVocabularies(const RowSet<Scalar>& train, FeaturePlan* plan) {
  for (size_t k = 0; k < plan->categorical.size(); ++k) {
    std::set<std::string> values;
    for (int64_t r : train.rows) values.insert(train.raw->categories[r][k]);
    plan->categorical[k].vocabulary.assign(values.begin(), values.end());
  }
}

// Mean and population standard deviation per feature over `train` (two passes, in double).
template <typename Scalar>
Standardizer FitStandardizer(const RowSet<Scalar>& train, const FeaturePlan& plan) {
  const size_t features = static_cast<size_t>(plan.Features());
  const double n = static_cast<double>(train.rows.size());
  std::vector<double> row(features), mean(features, 0.0), squares(features, 0.0);
  for (int64_t r : train.rows) {
    EncodeRawRow(*train.raw, r, plan, row.data());
    for (size_t j = 0; j < features; ++j) mean[j] += row[j];
  }
  for (double& m : mean) m /= n;
  for (int64_t r : train.rows) {
    EncodeRawRow(*train.raw, r, plan, row.data());
    for (size_t j = 0; j < features; ++j) squares[j] += (row[j] - mean[j]) * (row[j] - mean[j]);
  }
  Standardizer s;
  for (size_t j = 0; j < features; ++j) {
    const double sd = std::sqrt(squares[j] / n);
    s.mean.push_back(static_cast<float>(mean[j]));
    s.scale.push_back(sd < kMinScale ? 1.0f : static_cast<float>(sd));
  }
  return s;
}

// x' = (x - mean) / scale with the stored float statistics, so that applying the standardizer
// later to new inputs gives the same numbers.
template <typename Scalar>
StatusOr<Matrix> Standardize(const RowSet<Scalar>& set, const FeaturePlan& plan, const Standardizer& s) {
  const int64_t features = plan.Features();
  Matrix x(static_cast<Eigen::Index>(set.rows.size()), features);
  AdviseHugePages(x.data(), static_cast<size_t>(x.size()) * sizeof(float));
  std::vector<double> row(static_cast<size_t>(features));
  for (size_t i = 0; i < set.rows.size(); ++i) {
    EncodeRawRow(*set.raw, set.rows[i], plan, row.data());
    CHORUS_RETURN_IF_ERROR(StandardizeRow(plan, s, row.data(), set.raw->origin[set.rows[i]],
                                          x.row(static_cast<Eigen::Index>(i)).data()));
  }
  return x;
}

// ---- targets ----

// Sorted distinct train labels: numerically if every one is an integer, else lexicographically.
template <typename Scalar>
StatusOr<std::vector<std::string>> ClassNames(const RowSet<Scalar>& train,
                                              const std::string& file) {
  std::set<std::string> distinct;
  for (int64_t r : train.rows) distinct.insert(train.raw->labels[r]);
  std::vector<std::string> names(distinct.begin(), distinct.end());
  if (names.size() < 2) {
    return Status::InvalidInput(file +
                                ": expected at least 2 classes in the training rows, found " +
                                std::to_string(names.size()) + " (" + JoinNames(names) + ")");
  }
  std::vector<std::pair<int64_t, std::string>> numbered;
  for (const std::string& name : names) {
    int64_t value;
    if (!ParseInteger(name, &value)) return names;
    numbered.emplace_back(value, name);
  }
  std::sort(numbered.begin(), numbered.end());
  for (size_t i = 0; i < names.size(); ++i) names[i] = numbered[i].second;
  return names;
}

template <typename Scalar>
Status ClassIndices(const RowSet<Scalar>& set, const std::vector<std::string>& class_names,
                    std::vector<int32_t>* labels) {
  std::unordered_map<std::string, int32_t> index;
  for (size_t k = 0; k < class_names.size(); ++k) index[class_names[k]] = static_cast<int32_t>(k);
  for (int64_t r : set.rows) {
    const auto it = index.find(set.raw->labels[r]);
    if (it == index.end()) {
      return Status::InvalidInput(set.raw->label_place[r] + ": label " +
                                  Quoted(set.raw->labels[r]) + " never appears in the training " +
                                  "rows (classes: " + JoinNames(class_names) + ")");
    }
    labels->push_back(it->second);
  }
  return Status::Ok();
}

// With a holdout from the training file: a class whose every row fell into validation leaves no
// training row, which ClassIndices would report as a label never seen; say what happened instead.
template <typename Scalar>
Status CheckHeldOutClassesKeepTrainingRows(const RowSet<Scalar>& train, const RowSet<Scalar>& validation,
                                           const std::string& file, double fraction) {
  std::set<std::string> known;
  for (int64_t r : train.rows) known.insert(train.raw->labels[r]);
  for (int64_t r : validation.rows) {
    const std::string& label = validation.raw->labels[r];
    if (known.count(label) == 0) {
      return Status::InvalidInput(
          file + ": every row of class " + Quoted(label) + " fell into the validation holdout " +
          "(data.validation.fraction " + NumberText(fraction) + "), so no training row has it; " +
          "cross-fit instead (data.validation.folds, stratified by class) or add rows of this class");
    }
  }
  return Status::Ok();
}

// Train mean and population standard deviation of the regression target (scale 1 if ~0).
template <typename Scalar>
void FitTarget(const RowSet<Scalar>& train, PreparedData* data) {
  const double n = static_cast<double>(train.rows.size());
  double mean = 0.0, squares = 0.0;
  for (int64_t r : train.rows) mean += train.raw->targets[r];
  mean /= n;
  for (int64_t r : train.rows) {
    squares += (train.raw->targets[r] - mean) * (train.raw->targets[r] - mean);
  }
  const double sd = std::sqrt(squares / n);
  data->target_mean = static_cast<float>(mean);
  data->target_scale = sd < kMinScale ? 1.0f : static_cast<float>(sd);
}

template <typename Scalar>
StatusOr<Split> MakeSplit(const RowSet<Scalar>& set, const FeaturePlan& plan,
                          const PreparedData& data) {
  Split split;
  CHORUS_ASSIGN_OR_RETURN(split.x, Standardize(set, plan, data.standardizer));
  for (int64_t r : set.rows) split.origin.push_back(set.raw->origin[r]);
  if (data.task == Task::kClassification) {
    CHORUS_RETURN_IF_ERROR(ClassIndices(set, data.class_names, &split.labels));
    return split;
  }
  for (int64_t r : set.rows) {
    split.targets.push_back(static_cast<float>((set.raw->targets[r] - data.target_mean) /
                                               static_cast<double>(data.target_scale)));
  }
  return split;
}

}  // namespace

template <typename Scalar>
StatusOr<PreparedData> Preprocess(const RawData<Scalar>& raw, const DataConfig& config,
                                  uint64_t run_seed) {
  RowSet<Scalar> train{&raw.train, AllRows(raw.train.rows())};
  RowSet<Scalar> validation{&raw.validation, AllRows(raw.validation.rows())};
  const int folds = ResolvedFolds(config, raw.train.rows());
  if (folds > raw.train.rows()) {
    return Status::InvalidInput(raw.train_file + ": expected at least " + std::to_string(folds) +
                                " rows for data.validation.folds = " + std::to_string(folds) +
                                ", found " + std::to_string(raw.train.rows()));
  }
  if (!raw.validation_from_file && folds == 0) {
    CHORUS_ASSIGN_OR_RETURN(Partition p, HoldOut(raw.train.rows(), config.validation_fraction,
                                                 run_seed, raw.train_file));
    train.rows = std::move(p.train);
    validation = {&raw.train, std::move(p.validation)};
  }
  FeaturePlan plan = raw.plan;
  FillVocabularies(train, &plan);
  PreparedData data;
  data.task = config.task;
  data.folds = folds;
  data.feature_names = plan.FeatureNames();
  data.plan = plan;
  if (data.task == Task::kClassification) {
    if (validation.raw == &raw.train) {
      CHORUS_RETURN_IF_ERROR(CheckHeldOutClassesKeepTrainingRows(train, validation, raw.train_file,
                                                                  config.validation_fraction));
    }
    CHORUS_ASSIGN_OR_RETURN(data.class_names, ClassNames(train, raw.train_file));
  } else {
    FitTarget(train, &data);
  }
  data.standardizer = FitStandardizer(train, plan);
  CHORUS_ASSIGN_OR_RETURN(data.train, MakeSplit(train, plan, data));
  CHORUS_ASSIGN_OR_RETURN(data.validation, MakeSplit(validation, plan, data));
  const RowSet<Scalar> test{&raw.test, AllRows(raw.test.rows())};
  CHORUS_ASSIGN_OR_RETURN(data.test, MakeSplit(test, plan, data));
  data.hash = DataHash(data);
  return data;
}

template StatusOr<PreparedData> Preprocess<double>(const RawData<double>&, const DataConfig&,
                                                   uint64_t);
template StatusOr<PreparedData> Preprocess<float>(const RawData<float>&, const DataConfig&,
                                                  uint64_t);

}  // namespace chorus

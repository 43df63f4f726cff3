#include "common/dataset.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <exception>
#include <numeric>
#include <set>
#include <unordered_map>
#include <utility>

#include "common/csv.h"
#include "common/feature_encoder.h"
#include "common/folds.h"
#include "common/idx.h"
#include "common/rng.h"
#include "common/sha256.h"

namespace chorus {
namespace {

constexpr double kMinScale = 1e-12;  // a standard deviation below this counts as 0
constexpr size_t kNamesInMessages = 20;

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

std::string Quoted(const std::string& s) { return "\"" + s + "\""; }

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (size_t i = 0; i < names.size() && i < kNamesInMessages; ++i) {
    text += (i ? ", " : "") + names[i];
  }
  return names.size() > kNamesInMessages ? text + ", ..." : text;
}

// The shortest text that reads back as the same double ("0.1", not "0.100000").
std::string NumberText(double value) {
  char text[32];
  for (int digits = 1; digits <= 17; ++digits) {
    std::snprintf(text, sizeof text, "%.*g", digits, value);
    if (std::strtod(text, nullptr) == value) break;
  }
  return text;
}

std::vector<int64_t> AllRows(int64_t n) {
  std::vector<int64_t> rows(static_cast<size_t>(n));
  std::iota(rows.begin(), rows.end(), int64_t{0});
  return rows;
}

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
Matrix Standardize(const RowSet<Scalar>& set, const FeaturePlan& plan, const Standardizer& s) {
  const int64_t features = plan.Features();
  Matrix x(static_cast<Eigen::Index>(set.rows.size()), features);
  std::vector<double> row(static_cast<size_t>(features));
  for (size_t i = 0; i < set.rows.size(); ++i) {
    EncodeRawRow(*set.raw, set.rows[i], plan, row.data());
    StandardizeRow(s, row.data(), x.row(static_cast<Eigen::Index>(i)).data());
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
  split.x = Standardize(set, plan, data.standardizer);
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

// ---- splitting, hashing, the shared pipeline ----

struct Partition {
  std::vector<int64_t> train, validation;
};

// Fisher-Yates shuffle of 0..n-1 with Philox(Derive(seed, "validation")); the first
// max(1, round(fraction * n)) become validation. Both parts come back in ascending order.
StatusOr<Partition> HoldOut(int64_t n, double fraction, uint64_t seed, const std::string& file) {
  const int64_t k = std::max<int64_t>(1, std::llround(fraction * static_cast<double>(n)));
  if (k >= n) {
    const std::string rows = std::to_string(n) + " row" + (n == 1 ? "" : "s");
    return Status::InvalidInput(file + ": expected enough rows to hold out validation fraction " +
                                NumberText(fraction) + " and keep some, found " + rows);
  }
  std::vector<int64_t> order = AllRows(n);
  Philox rng(Derive(seed, "validation"));
  for (int64_t i = n - 1; i > 0; --i) {
    std::swap(order[i], order[rng.NextBelow(static_cast<uint64_t>(i) + 1)]);
  }
  Partition p;
  p.validation.assign(order.begin(), order.begin() + k);
  p.train.assign(order.begin() + k, order.end());
  std::sort(p.validation.begin(), p.validation.end());
  std::sort(p.train.begin(), p.train.end());
  return p;
}

// Feeds values to SHA-256 with their lengths, so that different data never share a byte stream.
class DataHasher {
 public:
  void Bytes(const void* data, size_t n) { sha_.Update(data, n); }
  void Count(size_t n) {
    const uint64_t value = n;
    Bytes(&value, sizeof value);
  }
  void Text(const std::string& s) {
    Count(s.size());
    Bytes(s.data(), s.size());
  }
  void Texts(const std::vector<std::string>& texts) {
    Count(texts.size());
    for (const std::string& s : texts) Text(s);
  }
  template <typename T>
  void Values(const T* data, size_t n) {
    Count(n);
    Bytes(data, n * sizeof(T));
  }
  std::string Finish() { return sha_.FinishHex(); }

 private:
  Sha256 sha_;
};

std::string HashOf(const PreparedData& d) {
  DataHasher h;
  h.Text(TaskName(d.task));
  h.Texts(d.feature_names);
  h.Texts(d.class_names);
  h.Count(d.plan.categorical.size());
  for (const CategoricalColumn& c : d.plan.categorical) {
    h.Text(c.name);
    h.Texts(c.vocabulary);
  }
  h.Values(d.standardizer.mean.data(), d.standardizer.mean.size());
  h.Values(d.standardizer.scale.data(), d.standardizer.scale.size());
  h.Values(&d.target_mean, 1);
  h.Values(&d.target_scale, 1);
  for (const Split* s : {&d.train, &d.validation, &d.test}) {
    h.Count(static_cast<size_t>(s->x.cols()));
    h.Values(s->x.data(), static_cast<size_t>(s->x.size()));
    h.Values(s->labels.data(), s->labels.size());
    h.Values(s->targets.data(), s->targets.size());
  }
  return h.Finish();
}

template <typename Scalar>
StatusOr<PreparedData> Prepare(const RawData<Scalar>& raw, const DataConfig& config,
                               uint64_t seed) {
  RowSet<Scalar> train{&raw.train, AllRows(raw.train.rows())};
  RowSet<Scalar> validation{&raw.validation, AllRows(raw.validation.rows())};
  const int folds = ResolvedFolds(config, raw.train.rows());
  if (folds > raw.train.rows()) {
    return Status::InvalidInput(raw.train_file + ": expected at least " + std::to_string(folds) +
                                " rows for data.validation.folds = " + std::to_string(folds) +
                                ", found " + std::to_string(raw.train.rows()));
  }
  if (!raw.validation_from_file && folds == 0) {
    CHORUS_ASSIGN_OR_RETURN(
        Partition p, HoldOut(raw.train.rows(), config.validation_fraction, seed, raw.train_file));
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
    CHORUS_ASSIGN_OR_RETURN(data.class_names, ClassNames(train, raw.train_file));
  } else {
    FitTarget(train, &data);
  }
  data.standardizer = FitStandardizer(train, plan);
  CHORUS_ASSIGN_OR_RETURN(data.train, MakeSplit(train, plan, data));
  CHORUS_ASSIGN_OR_RETURN(data.validation, MakeSplit(validation, plan, data));
  const RowSet<Scalar> test{&raw.test, AllRows(raw.test.rows())};
  CHORUS_ASSIGN_OR_RETURN(data.test, MakeSplit(test, plan, data));
  data.hash = HashOf(data);
  return data;
}

// ---- CSV ----

std::string HeaderPlace(const CsvTable& table) {
  return table.path + ":" + std::to_string(table.header_line);
}

StatusOr<int64_t> FindColumn(const CsvTable& table, const std::string& name, const char* role) {
  const auto it = std::find(table.header.begin(), table.header.end(), name);
  if (it != table.header.end()) return static_cast<int64_t>(it - table.header.begin());
  return Status::InvalidInput(HeaderPlace(table) + ": expected a " + role + " column " +
                              Quoted(name) + " in the header, found " + JoinNames(table.header));
}

// The train header decides the features: every column but the target, numeric unless listed in
// config.categorical.
StatusOr<FeaturePlan> PlanCsvColumns(const CsvTable& train, const DataConfig& config) {
  CHORUS_RETURN_IF_ERROR(FindColumn(train, config.target, "target").status());
  for (const std::string& name : config.categorical) {
    if (name == config.target) {
      return Status::InvalidInput("data.categorical: " + Quoted(name) + " is the target column");
    }
    CHORUS_RETURN_IF_ERROR(FindColumn(train, name, "categorical").status());
  }
  FeaturePlan plan;
  int64_t numeric = 0;
  for (const std::string& name : train.header) {
    if (name == config.target) continue;
    const bool categorical = std::find(config.categorical.begin(), config.categorical.end(),
                                       name) != config.categorical.end();
    const int64_t index = categorical ? static_cast<int64_t>(plan.categorical.size()) : numeric++;
    if (categorical) plan.categorical.push_back({name, {}});
    plan.columns.push_back({name, categorical, index});
  }
  if (plan.columns.empty()) {
    return Status::InvalidInput(HeaderPlace(train) + ": expected feature columns besides the " +
                                "target " + Quoted(config.target) + ", found none");
  }
  return plan;
}

// Where each plan column, and the target, sit in one file's header.
struct CsvLayout {
  std::vector<int64_t> columns;
  int64_t target = 0;
};

StatusOr<CsvLayout> MapColumns(const CsvTable& table, const FeaturePlan& plan,
                               const std::string& target) {
  CsvLayout layout;
  CHORUS_ASSIGN_OR_RETURN(layout.target, FindColumn(table, target, "target"));
  for (const FeaturePlan::Column& column : plan.columns) {
    CHORUS_ASSIGN_OR_RETURN(const int64_t index, FindColumn(table, column.name, "feature"));
    layout.columns.push_back(index);
  }
  return layout;
}

Status AddCsvTarget(const std::string& field, const std::string& place, const DataConfig& config,
                    RawRows<double>* raw) {
  if (config.task == Task::kRegression) {
    double value;
    CHORUS_RETURN_IF_ERROR(ParseNumber(field, place, config.target, &value));
    raw->targets.push_back(value);
    return Status::Ok();
  }
  if (field.empty()) {
    return Status::InvalidInput(place + ": expected a class label in column " +
                                Quoted(config.target) + ", found an empty field");
  }
  raw->labels.push_back(field);
  return Status::Ok();
}

Status AddCsvRow(const CsvTable& table, size_t r, const FeaturePlan& plan, const CsvLayout& layout,
                 const DataConfig& config, RawRows<double>* raw) {
  const std::vector<std::string>& fields = table.rows[r];
  const std::string line = table.path + ":" + std::to_string(table.lines[r]);
  const auto place = [&line](int64_t column) { return line + ":" + std::to_string(column + 1); };
  std::vector<std::string> categories;
  for (size_t k = 0; k < plan.columns.size(); ++k) {
    const std::string& field = fields[layout.columns[k]];
    if (plan.columns[k].categorical) {
      categories.push_back(field);
      continue;
    }
    double value;
    CHORUS_RETURN_IF_ERROR(
        ParseNumber(field, place(layout.columns[k]), plan.columns[k].name, &value));
    raw->numeric.push_back(value);
  }
  CHORUS_RETURN_IF_ERROR(AddCsvTarget(fields[layout.target], place(layout.target), config, raw));
  raw->categories.push_back(std::move(categories));
  raw->origin.push_back(line);
  raw->label_place.push_back(place(layout.target));
  return Status::Ok();
}

StatusOr<RawRows<double>> CsvRows(CsvTable table, const FeaturePlan& plan, const DataConfig& config,
                                  int64_t max_rows) {
  if (max_rows > 0 && static_cast<int64_t>(table.rows.size()) > max_rows) {
    table.rows.resize(static_cast<size_t>(max_rows));
    table.lines.resize(static_cast<size_t>(max_rows));
  }
  CHORUS_ASSIGN_OR_RETURN(const CsvLayout layout, MapColumns(table, plan, config.target));
  RawRows<double> raw;
  raw.numeric_cols = plan.NumericColumns();
  for (size_t r = 0; r < table.rows.size(); ++r) {
    CHORUS_RETURN_IF_ERROR(AddCsvRow(table, r, plan, layout, config, &raw));
  }
  return raw;
}

StatusOr<PreparedData> LoadCsv(const DataConfig& config, uint64_t seed) {
  RawData<double> raw;
  raw.train_file = config.train;
  CHORUS_ASSIGN_OR_RETURN(CsvTable train, ReadCsv(config.train));
  CHORUS_ASSIGN_OR_RETURN(raw.plan, PlanCsvColumns(train, config));
  CHORUS_ASSIGN_OR_RETURN(raw.train,
                          CsvRows(std::move(train), raw.plan, config, config.max_train_rows));
  if (!config.validation_file.empty()) {
    CHORUS_ASSIGN_OR_RETURN(CsvTable validation, ReadCsv(config.validation_file));
    CHORUS_ASSIGN_OR_RETURN(raw.validation, CsvRows(std::move(validation), raw.plan, config, 0));
    raw.validation_from_file = true;
  }
  CHORUS_ASSIGN_OR_RETURN(CsvTable test, ReadCsv(config.test));
  CHORUS_ASSIGN_OR_RETURN(raw.test,
                          CsvRows(std::move(test), raw.plan, config, config.max_test_rows));
  return Prepare(raw, config, seed);
}

// ---- IDX ----

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

StatusOr<PreparedData> LoadIdx(const DataConfig& config, uint64_t seed) {
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
  return Prepare(raw, config, seed);
}

// ---- entry points ----

Status CheckConfig(const DataConfig& config) {
  const bool csv = config.format == "csv";
  if (!csv && config.format != "idx") {
    return Status::InvalidInput("data.format: expected csv or idx, found " + Quoted(config.format));
  }
  const bool from_file =
      csv ? !config.validation_file.empty() : !config.validation_idx.images.empty();
  const double f = config.validation_fraction;
  if (!from_file && !(f > 0.0 && f <= 0.5)) {
    return Status::InvalidInput("data.validation.fraction: expected a number in (0, 0.5], found " +
                                NumberText(f));
  }
  if (csv && (config.train.empty() || config.test.empty() || config.target.empty())) {
    return Status::InvalidInput("data: csv needs train, test and target");
  }
  if (!csv && (config.train_idx.images.empty() || config.train_idx.labels.empty() ||
               config.test_idx.images.empty() || config.test_idx.labels.empty())) {
    return Status::InvalidInput("data: idx needs train and test, each with images and labels");
  }
  return Status::Ok();
}

// The columns of `table` in class_names order; the header must name each class exactly once.
StatusOr<std::vector<int64_t>> ClassColumns(const CsvTable& table,
                                            const std::vector<std::string>& class_names) {
  if (table.header.size() != class_names.size()) {
    return Status::InvalidInput(HeaderPlace(table) + ": expected one column per class (" +
                                JoinNames(class_names) + "), found " + JoinNames(table.header));
  }
  std::vector<int64_t> columns;
  for (const std::string& name : class_names) {
    CHORUS_ASSIGN_OR_RETURN(const int64_t column, FindColumn(table, name, "class"));
    columns.push_back(column);
  }
  return columns;
}

StatusOr<Matrix> TrueProbabilities(const std::string& path, const PreparedData& data) {
  CHORUS_ASSIGN_OR_RETURN(const CsvTable table, ReadCsv(path));
  CHORUS_ASSIGN_OR_RETURN(const std::vector<int64_t> columns,
                          ClassColumns(table, data.class_names));
  if (static_cast<int64_t>(table.rows.size()) != data.test.rows()) {
    return Status::InvalidInput(path + ": expected " + std::to_string(data.test.rows()) +
                                " rows, one per test row, found " +
                                std::to_string(table.rows.size()));
  }
  Matrix p(data.test.rows(), data.classes());
  for (size_t r = 0; r < table.rows.size(); ++r) {
    for (size_t k = 0; k < columns.size(); ++k) {
      const std::string& field = table.rows[r][columns[k]];
      const std::string place =
          path + ":" + std::to_string(table.lines[r]) + ":" + std::to_string(columns[k] + 1);
      double value;
      CHORUS_RETURN_IF_ERROR(ParseNumber(field, place, data.class_names[k], &value));
      if (value < 0.0 || value > 1.0) {
        return Status::InvalidInput(place + ": expected a probability in [0, 1] in column " +
                                    Quoted(data.class_names[k]) + ", found " + Quoted(field));
      }
      p(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(k)) = static_cast<float>(value);
    }
  }
  return p;
}

}  // namespace

StatusOr<PreparedData> LoadPreparedData(const DataConfig& config, uint64_t run_seed) {
  try {
    CHORUS_RETURN_IF_ERROR(CheckConfig(config));
    return config.format == "csv" ? LoadCsv(config, run_seed) : LoadIdx(config, run_seed);
  } catch (const std::exception& e) {
    return Status::Internal(std::string("loading data: ") + e.what());
  }
}

StatusOr<Matrix> LoadTrueProbabilities(const std::string& path, const PreparedData& data) {
  try {
    return TrueProbabilities(path, data);
  } catch (const std::exception& e) {
    return Status::Internal(path + ": " + e.what());
  }
}

}  // namespace chorus

#include "common/csv_dataset.h"

#include <algorithm>
#include <string>
#include <utility>
#include <vector>

#include "common/csv.h"
#include "common/feature_encoder.h"
#include "common/message_text.h"
#include "common/preprocessing.h"
#include "common/raw_rows.h"

namespace chorus {
namespace {

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

}  // namespace

StatusOr<PreparedData> LoadCsvData(const DataConfig& config, uint64_t run_seed) {
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
  return Preprocess(raw, config, run_seed);
}

}  // namespace chorus

#include "common/feature_encoder.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <string_view>

#include "common/message_text.h"

namespace chorus {

int64_t FeaturePlan::Features() const {
  int64_t n = 0;
  for (const Column& c : columns) {
    n += c.categorical ? static_cast<int64_t>(categorical[c.index].vocabulary.size()) : 1;
  }
  return n;
}

std::vector<int64_t> FeaturePlan::FirstFeatures() const {
  std::vector<int64_t> first;
  int64_t n = 0;
  for (const Column& c : columns) {
    first.push_back(n);
    n += c.categorical ? static_cast<int64_t>(categorical[c.index].vocabulary.size()) : 1;
  }
  return first;
}

int64_t FeaturePlan::NumericColumns() const {
  return static_cast<int64_t>(columns.size() - categorical.size());
}

std::vector<std::string> FeaturePlan::FeatureNames() const {
  std::vector<std::string> names;
  for (const Column& column : columns) {
    if (!column.categorical) {
      names.push_back(column.name);
      continue;
    }
    for (const std::string& value : categorical[column.index].vocabulary) {
      names.push_back(column.name + "=" + value);
    }
  }
  return names;
}

Status ParseNumber(const std::string& field, const std::string& place, const std::string& column,
                   double* value) {
  const size_t first = field.find_first_not_of(" \t");
  std::string_view text =
      first == std::string::npos
          ? std::string_view()
          : std::string_view(field).substr(first, field.find_last_not_of(" \t") - first + 1);
  if (text.size() > 1 && text[0] == '+' && text[1] != '-') text.remove_prefix(1);
  const char* end = text.data() + text.size();
  const auto [ptr, error] = std::from_chars(text.data(), end, *value);
  const std::string found = " in column " + Quoted(column) + ", found " + Quoted(field);
  if (text.empty() || error == std::errc::invalid_argument || ptr != end) {
    return Status::InvalidInput(place + ": expected a number" + found);
  }
  if (error == std::errc::result_out_of_range || !std::isfinite(*value)) {
    return Status::InvalidInput(place + ": expected a finite number" + found);
  }
  // Features and targets end up as floats (their training mean and scale too), so a value past
  // float range could never be represented.
  if (std::abs(*value) > std::numeric_limits<float>::max()) {
    return Status::InvalidInput(place + ": expected a number within float range (about +-3.4e38)" + found);
  }
  return Status::Ok();
}

template <typename Scalar>
void EncodeRow(const FeaturePlan& plan, const Scalar* numeric,
               const std::vector<std::string>* categories, double* out) {
  for (const FeaturePlan::Column& column : plan.columns) {
    if (!column.categorical) {
      *out++ = numeric[column.index];
      continue;
    }
    const std::vector<std::string>& vocabulary = plan.categorical[column.index].vocabulary;
    const std::string& value = (*categories)[column.index];
    std::fill(out, out + vocabulary.size(), 0.0);
    const auto it = std::lower_bound(vocabulary.begin(), vocabulary.end(), value);
    if (it != vocabulary.end() && *it == value) out[it - vocabulary.begin()] = 1.0;
    out += vocabulary.size();
  }
}

template void EncodeRow<float>(const FeaturePlan&, const float*, const std::vector<std::string>*,
                               double*);
template void EncodeRow<double>(const FeaturePlan&, const double*, const std::vector<std::string>*,
                                double*);

Status StandardizeRow(const FeaturePlan& plan, const Standardizer& s, const double* row,
                      const std::string& place, float* out) {
  for (size_t j = 0; j < s.mean.size(); ++j) {
    const double standardised = (row[j] - s.mean[j]) / s.scale[j];
    out[j] = static_cast<float>(standardised);
    if (!std::isfinite(out[j])) {
      return Status::InvalidInput(place + ": feature " + Quoted(plan.FeatureNames()[j]) + " = " +
                                  NumberText(row[j]) + " standardises to " + NumberText(standardised) +
                                  " (training mean " + NumberText(s.mean[j]) + ", scale " +
                                  NumberText(s.scale[j]) + "), beyond float range: expected a value "
                                  "nearer the training data");
    }
  }
  return Status::Ok();
}

StatusOr<CsvRowEncoder> CsvRowEncoder::ForHeader(const FeaturePlan& plan, const Standardizer& s,
                                                 const std::vector<std::string>& header,
                                                 const std::string& header_place) {
  CsvRowEncoder encoder(plan, s);
  for (const FeaturePlan::Column& column : plan.columns) {
    const auto it = std::find(header.begin(), header.end(), column.name);
    if (it == header.end()) {
      return Status::InvalidInput(header_place + ": expected a feature column " +
                                  Quoted(column.name) + " in the header; the bundle was trained " +
                                  "on " + std::to_string(plan.columns.size()) + " columns");
    }
    encoder.field_of_column_.push_back(static_cast<int64_t>(it - header.begin()));
  }
  return encoder;
}

Status CsvRowEncoder::Encode(const std::vector<std::string>& fields, const std::string& line_place,
                             float* out) const {
  std::vector<double> numeric;
  std::vector<std::string> categories;
  for (size_t k = 0; k < plan_->columns.size(); ++k) {
    const int64_t field = field_of_column_[k];
    if (plan_->columns[k].categorical) {
      categories.push_back(fields[field]);
      continue;
    }
    double value;
    CHORUS_RETURN_IF_ERROR(ParseNumber(fields[field], line_place + ":" + std::to_string(field + 1),
                                       plan_->columns[k].name, &value));
    numeric.push_back(value);
  }
  std::vector<double> row(static_cast<size_t>(features_));
  EncodeRow(*plan_, numeric.data(), &categories, row.data());
  return StandardizeRow(*plan_, *standardizer_, row.data(), line_place, out);
}

}  // namespace chorus

#include "common/training_ranges.h"

#include <algorithm>
#include <cmath>
#include <cstdio>


namespace chorus {

TrainingRanges TrainingRanges::For(const Bundle& bundle) {
  TrainingRanges r;
  const FeaturePlan& plan = bundle.preprocessing.plan;
  r.mean_ = bundle.preprocessing.standardizer.mean;
  r.scale_ = bundle.preprocessing.standardizer.scale;
  const std::vector<int64_t> first = plan.FirstFeatures();
  for (size_t k = 0; k < plan.columns.size(); ++k) {
    const FeaturePlan::Column& c = plan.columns[k];
    Column column;
    column.name = c.name;
    column.categorical = c.categorical;
    column.first_feature = first[k];
    if (c.categorical) {
      column.features =
          static_cast<int64_t>(plan.categorical[static_cast<size_t>(c.index)].vocabulary.size());
    } else {
      const DistributionSketch& s = bundle.training_summary.columns[k].numeric;
      column.min = s.min();
      column.max = s.max();
      // Features pass through float on the way in and out: a relative 1e-6 absorbs that.
      const double margin = std::max(kRangeMargin * (column.max - column.min),
                                     1e-6 * std::max(std::abs(column.min), std::abs(column.max)));
      column.low = column.min - margin;
      column.high = column.max + margin;
    }
    r.columns_.push_back(column);
  }
  return r;
}

RangeFindings TrainingRanges::Check(const Matrix& x, size_t first) const {
  RangeFindings f;
  f.column_rows.assign(columns_.size(), 0);
  for (int64_t row = 0; row < x.rows(); ++row) {
    bool outside = false;
    for (size_t k = 0; k < columns_.size(); ++k) {
      const Column& c = columns_[k];
      bool out = true;
      for (int64_t j = c.first_feature; j < c.first_feature + c.features; ++j) {
        const double raw = static_cast<double>(x(row, j)) * scale_[j] + mean_[j];
        // A categorical value is known when one of its one-hot features is set.
        out = c.categorical ? out && raw < 0.5 : !(raw >= c.low && raw <= c.high);
      }
      if (out) {
        ++f.column_rows[k];
        outside = true;
      }
    }
    if (!outside) continue;
    if (f.first_rows.size() < first) f.first_rows.push_back(row);
    ++f.rows;
  }
  return f;
}

std::string TrainingRanges::Describe(size_t column) const {
  const Column& c = columns_[column];
  if (c.categorical) return c.name + " (a value training never saw)";
  char range[64];
  std::snprintf(range, sizeof range, "[%.6g, %.6g]", c.min, c.max);
  return c.name + " (training range " + range + ")";
}

}  // namespace chorus

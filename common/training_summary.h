// A compact summary of a run's training data, stored in its bundle so that later data can be
// compared with it (common/distribution_shift.h) without the training files: per input column a
// distribution sketch (numeric) or category fractions (categorical), and the labels' class
// fractions (classification) or the target's sketch (regression).
//
// A numeric sketch keeps every distinct value when there are at most kSketchExactValues of them,
// and is then exact; otherwise it keeps the values at the quantile levels 0, 1/100, ..., 1. At
// each kept value v it stores the exact fractions of rows below v and at or below v, so point
// masses (a pixel that is 0 in half the images) are kept exactly and, between two kept values,
// the distribution function is known to within the gap between them (at most 1/100 + 1/rows).
// Missing values need no field: a numeric field must be a number for a row to train (rows with
// an empty numeric field are refused), and an empty categorical field is a category of its own.
// Thread safety: plain values and reentrant free functions.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/feature_encoder.h"
#include "common/parallel_for.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

constexpr int kSketchExactValues = 101;  // distinct values kept exactly; also the quantile knots
constexpr int64_t kMaxSketchValues = 100000;  // CheckTrainingSummary's bound on a stored sketch

// A numeric distribution: values strictly ascending; below[i] = fraction of rows < values[i],
// upto[i] = fraction <= values[i]; 0 <= below[i] <= upto[i] <= below[i+1]; upto.back() = 1.
// The first value is the minimum and the last the maximum. Empty only for an empty column.
struct DistributionSketch {
  std::vector<float> values;
  std::vector<float> below;
  std::vector<float> upto;

  bool empty() const { return values.empty(); }
  double min() const { return values.front(); }
  double max() const { return values.back(); }
  // F(x) = fraction <= x: exact at and outside the kept values, linear between them.
  double Cdf(double x) const;
  // F(x-) = fraction < x, its left limit.
  double CdfBelow(double x) const;
};

// The sketch of `values` (any order; sorted in place). Requires finite values.
DistributionSketch SketchOf(std::vector<double>* values);

struct ColumnSummary {
  std::string name;  // the input column, as in the bundle's feature plan
  bool categorical = false;
  DistributionSketch numeric;           // numeric columns
  std::vector<double> category_shares;  // categorical: one fraction per vocabulary entry
};

struct TrainingSummary {
  int64_t rows = 0;                    // training rows summarised; 0 = no summary
  std::vector<ColumnSummary> columns;  // one per feature-plan column, in plan order
  std::vector<double> class_shares;    // classification: one fraction per class, in class order
  DistributionSketch target;           // regression: the target in its own units

  bool empty() const { return rows == 0; }
};

// The summary of `data`'s train split, in raw units (features un-standardised with the data's
// standardizer, the regression target with its mean and scale). Columns are sketched through
// `parallel` (null: one after another); the result does not depend on it.
TrainingSummary SummarizeTraining(const PreparedData& data, const ParallelFor* parallel);

// Checks a summary read from a file against the bundle it came with: one column per plan column
// with the same names and kinds, category shares per vocabulary entry, class shares per class
// (classification) or a target sketch (regression), sketches well formed (at most
// kMaxSketchValues values, finite, ascending, fractions in [0, 1] and ordered as above), shares
// in [0, 1] summing to 1 within 1e-4. Errors (kInvalidInput) start with `source`.
Status CheckTrainingSummary(const TrainingSummary& s, const FeaturePlan& plan, Task task,
                            size_t classes, const std::string& source);

}  // namespace chorus

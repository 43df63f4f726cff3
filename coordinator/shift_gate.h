// The promotion gate's data-shift check: how far a candidate bundle's training data has moved
// from the current bundle's, from the summaries both bundles carry (common/training_summary.h),
// column by column (PSI and KS, common/distribution_shift.h) and for the labels (class shares, or
// the regression target). The current bundle's data is the reference. Columns are matched by
// name; a column of one bundle only, or of another kind in each, is listed, not compared.
// Thread safety: reentrant free functions.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/bundle.h"
#include "coordinator/gate.h"

namespace chorus {

struct ColumnShift {
  std::string column;  // the input column's name, or "(labels)" / "(target)"
  double psi = 0;
  double ks = 0;  // NaN where it does not apply (categorical columns, class shares)
};

struct ShiftComparison {
  // Why nothing was compared ("" when compared): no current bundle, or a bundle without summary.
  std::string skipped;
  std::vector<ColumnShift> columns;  // every compared input column, largest PSI first
  ColumnShift labels;                // "(labels)": class shares; "(target)": regression target
  std::vector<std::string> unmatched;  // "NAME (candidate only)", "(current only)", "(kind differs)"
  std::vector<std::string> refusals;   // limits exceeded (GateLimits max_psi, max_ks), as reasons
};

// Compares the candidate's training summary with the current bundle's under `limits`.
ShiftComparison CompareTrainingData(const Bundle& current, const Bundle& candidate,
                                    const GateLimits& limits);

// {"skipped", "rows": {current, candidate}, "labels", "most_shifted": the first `shown` columns,
//  "columns_compared", "unmatched", "refusals"}; psi/ks as numbers, ks null where NaN.
nlohmann::json ShiftComparisonJson(const ShiftComparison& s, const Bundle& current,
                                   const Bundle& candidate, size_t shown);

}  // namespace chorus

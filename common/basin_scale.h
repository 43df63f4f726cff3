// Choosing the basin-fit covariance scale on validation data (ensemble.basin.scale: tune): every
// member's samples are re-drawn from its fit at each candidate scale, and the scale whose uniform
// mixture of all samples has the lowest validation NLL (temperature 1) wins. The members' sample
// outputs are then replaced by those at the chosen scale, so assembly, reports and bundles all
// see one consistent ensemble. Thread safety: reentrant; uses only the calling thread.
#pragma once

#include <vector>

#include "common/member_training.h"
#include "common/prepared_data.h"

namespace chorus {

// The grid: 1/4, 1/2, 1, 2 times the fitted covariance (a coarse grid around the fit itself, as
// is common practice; SWAG's own experiments used 0.5, from memory).
const std::vector<double>& BasinScaleCandidates();

// Requires every member to carry a basin fit and sample seeds, and `net` to be the members'
// network. Rewrites members' sample_validation_outputs / sample_test_outputs at the chosen
// scale and returns it.
double TuneBasinScale(const PreparedData& data, const Mlp& net, std::vector<MemberResult>& members);

// The same with cross-fitting (data.folds > 0): validation is every training row, each predicted
// by the samples of the fold job that held it out. fold_of_row: the run's fold assignment
// (common/folds.h); folds[m][k] is member m's job without fold k (same sample seeds as the
// member). Members' validation sample outputs become the out-of-fold
// ones at the chosen scale (common/folds.h AdoptOutOfFoldOutputs), test outputs their own.
double TuneBasinScaleOutOfFold(const PreparedData& data, const Mlp& net, const std::vector<int>& fold_of_row,
                               const std::vector<std::vector<const MemberResult*>>& folds,
                               std::vector<MemberResult>& members);

}  // namespace chorus

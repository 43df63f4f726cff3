// The test set's uncertainty summary (UncertaintySummary, common/ensemble_evaluation.h) of the
// calibrated ensemble mixture: averages of the per-input split, how well each part flags errors,
// selective prediction and the epistemic histogram. Thread safety: reentrant free functions.
#pragma once

#include <cstdint>
#include <vector>

#include "common/ensemble_evaluation.h"
#include "common/metrics.h"
#include "common/size_curve.h"

namespace chorus {

// Entropy split (nats) of the weighted test mixture of members' logits at `temperature`, the
// AUROC of each part for flagging wrong predictions, selective accuracy and the histogram of
// mutual information over correct and wrong predictions. weights: one per member.
UncertaintySummary ClassificationUncertaintySummary(const MemberSamples& test,
                                                    const std::vector<double>& weights,
                                                    double temperature,
                                                    const std::vector<int32_t>& labels);

// Variance split (squared target units) of the calibrated test mixture, its epistemic histogram
// (hits: targets inside the 90% interval, from the PIT, one value per input) and selective RMSE
// ranked by total variance. targets: original units.
UncertaintySummary RegressionUncertaintySummary(const GaussianMixture& calibrated,
                                                const std::vector<double>& pit,
                                                const std::vector<double>& targets);

}  // namespace chorus

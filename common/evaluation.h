// Assembling finished members into the ensemble and scoring everything on test: each member, the
// mean and best member, the ensemble before and after temperature, its uncertainty split, and the
// size grid (members x samples). The results' shapes: common/ensemble_evaluation.h.
//
// Order of assembly, and why: member weights are learned first, on validation at temperature 1
// (uniform, stacking or greedy: common/weighting.h); then one temperature is tuned on validation
// for the weighted mixture. Weights decide which members to trust; the temperature then fixes the
// mixture's overall sharpness, a 1-D correction that cannot undo a bad weighting but does correct
// the over- or under-confidence the weighting leaves. Each member's samples share its weight
// equally.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <vector>

#include "common/assembly.h"
#include "common/config.h"
#include "common/ensemble_evaluation.h"
#include "common/matrix.h"
#include "common/member_training.h"
#include "common/parallel_for.h"
#include "common/prepared_data.h"

namespace chorus {

// Member m's Gaussian predictive (original target units) from its (mean, log-variance) outputs on
// the standardised target: mean = mu * scale + shift, stddev = exp(s / 2) * scale.
MemberGaussian ToGaussian(const Matrix& outputs, const PreparedData& data);

// Requires at least one member; every member's outputs match the data's validation/test rows and
// every member has the same number of samples. true_probabilities: optional test rows x classes
// matrix of the data's true class probabilities. The size grid's subsets are scored through
// `parallel` (null: on this thread); the result does not depend on it.
EnsembleEvaluation EvaluateEnsemble(const PreparedData& data,
                                    const std::vector<MemberResult>& members,
                                    const EnsembleConfig& ensemble, const ReportConfig& report,
                                    uint64_t seed, const Matrix* true_probabilities,
                                    const ParallelFor* parallel = nullptr);

}  // namespace chorus

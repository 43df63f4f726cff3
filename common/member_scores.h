// Scoring each member of an ensemble alone on test, and the mean and best member over them.
// test[m][s] is member m's sample s on the test split. Thread safety: reentrant free functions.
#pragma once

#include <cstdint>
#include <vector>

#include "common/assembly.h"
#include "common/ensemble_evaluation.h"
#include "common/matrix.h"
#include "common/member_training.h"
#include "common/size_curve.h"

namespace chorus {

// Fills samples, test (the uniform mixture of the member's samples), test_point (its trained
// point alone, members[m].test_outputs), both at T = 1 with `ece_bins` bins, and validation_nll
// (-mean_i ln L(i, m), L floored at 1e-300; L from ClassLikelihoods, common/ensemble_assembly.h)
// of scores[m] for every member. Requires scores.size() == members.size() == test.size().
void ScoreClassificationMembers(const MemberSamples& test, const std::vector<MemberResult>& members,
                                const std::vector<int32_t>& test_labels,
                                const MatrixD& validation_likelihoods, int ece_bins,
                                std::vector<MemberScores>& scores);

// Regression's counterpart: test_points[m] is member m's trained point on test, test_targets and
// the Gaussians in original units, L from GaussianLikelihoods.
void ScoreRegressionMembers(const MemberSampleGaussians& test,
                            const std::vector<MemberGaussian>& test_points,
                            const std::vector<double>& test_targets,
                            const MatrixD& validation_likelihoods,
                            std::vector<MemberScores>& scores);

// The metric-wise mean of the members' test scores. Requires at least one member.
Scores MeanMemberScores(const std::vector<MemberScores>& members);

// The position of the member with the lowest validation NLL, the first one on ties.
int BestMember(const std::vector<MemberScores>& members);

}  // namespace chorus

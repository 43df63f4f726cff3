// Scoring the run on a second, shifted test set (data.shift_test: a CSV or IDX file of inputs
// unlike the training data, such as corrupted images or classes the run never saw): how well each
// of the run's predictives tells those rows from the in-distribution test rows by its uncertainty
// (common/shift_detection.h). Labels in the file are ignored. Thread safety: reentrant.
#pragma once

#include <vector>

#include "common/config.h"
#include "common/ensemble_evaluation.h"
#include "common/matrix.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/shift_detection.h"
#include "common/status.h"

namespace chorus {

// Reads data.shift_test with the run's preprocessing (the code path of `chorus predict`), at most
// data.max_test_rows rows when that is set. Errors (kInvalidInput): the file cannot be read, a
// row is invalid (named by file and line or index), or it has no rows.
StatusOr<Matrix> LoadShiftedRows(const DataConfig& config, const PreparedData& data);

// Requires `members` and `ev` as EvaluateEnsemble saw them and `config` the config as assembled
// (its basin scale the one the samples were drawn at). Scores, on `shifted` (standardised rows):
// member 0's trained point alone at T = 1; with basin fits the members' trained points, weighted,
// at T = 1; and the ensemble as its bundle predicts (every sample, weights, tuned temperature).
ShiftEvaluation EvaluateShift(const Config& config, const PreparedData& data,
                              const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                              const Matrix& shifted);

}  // namespace chorus

// The test set's true class probabilities, when the data's author knows them (invented data):
// they give the Bayes-optimal test NLL the ensemble is compared with.
// Thread safety: reentrant free function.
#pragma once

#include <string>

#include "common/matrix.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Reads data.true_probabilities: rows x classes matrix whose header must equal class_names (in
// any order; columns are reordered to class_names) and whose row count must equal test rows.
// Every value must be a number in [0, 1]; errors name FILE:LINE:COLUMN (kInvalidInput).
StatusOr<Matrix> LoadTrueProbabilities(const std::string& path, const PreparedData& data);

}  // namespace chorus

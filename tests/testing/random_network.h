// Random networks and inputs for tests of the last-layer curvature and Laplace code.
// Thread safety: pure functions of their arguments (the Philox is the caller's).
#pragma once

#include <vector>

#include "common/matrix.h"
#include "common/mlp.h"
#include "common/rng.h"

namespace chorus::testing {

// rows x cols entries N(0, sd^2), row by row.
Matrix RandomNormal(int rows, int cols, double sd, Philox& rng);

// Weights from Mlp::Initialize (seeded from rng), then biases N(0, 0.5^2) so no bias is trivially
// zero.
std::vector<float> RandomParams(const Mlp& mlp, Philox& rng);

// LastHiddenFeatures (common/last_layer_curvature.h) of x, failing the calling test (and
// returning an empty matrix) on an error.
Matrix Features(const Mlp& mlp, const std::vector<float>& params, const Matrix& x);

}  // namespace chorus::testing

// An ensemble of last-layer Laplace members predicted without sampling: each member's linearised
// logits (mean and per-class variance, common/last_layer_laplace.h PredictLinearized, the
// covariance multiplied by the basin scale) through the probit approximation
// (ProbitProbabilities: MacKay 1992; Daxberger et al. 2021), mixed with the ensemble's weights at
// T = 1. The report sets it beside the Monte Carlo mixture of the same members at T = 1.
// Thread safety: free functions, reentrant.
#pragma once

#include <vector>

#include "common/basin_fit.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/status.h"

namespace chorus {

// One member: rows x K probabilities on x (rows x inputs) for a classification fit of method
// kLaplaceLastLayer whose mean is the trained point. scale > 0. Errors: kInvalidInput for another
// method, or x of the wrong width or with a non-finite entry.
StatusOr<MatrixD> LaplaceProbitPredictive(const Mlp& net, const BasinFit& fit, double scale,
                                          const ConstMatrixRef& x);

// sum_m weights[m] LaplaceProbitPredictive(net, *fits[m], scale, x); fits and weights of one size.
StatusOr<MatrixD> LaplaceProbitMixture(const Mlp& net, const std::vector<const BasinFit*>& fits,
                                       const std::vector<double>& weights, double scale,
                                       const ConstMatrixRef& x);

}  // namespace chorus

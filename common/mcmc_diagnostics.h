// Convergence and efficiency diagnostics for MCMC draws of one scalar quantity: split R-hat and
// the effective sample size (ESS), plain and rank-normalised, after Vehtari, Gelman, Simpson,
// Carpenter & Bürkner (2021), "Rank-normalization, folding, and localization: an improved R-hat
// for assessing convergence of MCMC", Bayesian Analysis 16(2).
// Shapes: `draws` is chains x iterations (one chain a row), at least 1 chain and 4 iterations.
// Every function splits each chain into halves (dropping the middle iteration when the count is
// odd), so M chains of N iterations are treated as 2M chains of floor(N/2).
// Degenerate input: any non-finite draw, or zero within-chain variance, gives NaN.
// Thread safety: pure functions, reentrant.
#pragma once

#include <cstdint>
#include <vector>

#include "common/matrix.h"

namespace chorus {

// Split R-hat on the values (Gelman & Rubin 1992 applied to split chains, as Vehtari et al. 2021):
//   B/N = var of the chain means (divisor M - 1), W = mean of the chain variances (divisor N - 1),
//   var+ = (N - 1)/N W + B/N,  R-hat = sqrt(var+ / W).
double SplitRhat(const MatrixD& draws);

// ESS of the values on split chains (Vehtari et al. 2021, sec. 3.2):
//   rho_t = 1 - (W - (1/M) sum_m s_m^2 rho_{t,m}) / var+, rho_{t,m} chain m's lag-t
//   autocorrelation (autocovariances with divisor N);  tau = -1 + 2 sum_{k=0}^{K} P_k with
//   P_k = rho_{2k} + rho_{2k+1}, K the last k before a non-positive P_k (Geyer's initial positive
//   sequence), each P_k lowered to min(P_0..P_k) (Geyer's initial monotone sequence);
//   ESS = M N / tau, at most M N log10(M N) (the paper's cap for antithetic chains).
double EffectiveSampleSize(const MatrixD& draws);

// The rank-normalised R-hat the paper recommends: max of split R-hat on the rank-normalised
// draws (bulk) and on the rank-normalised |draw - median| (folded, sensitive to unequal scales).
double RankNormalizedRhat(const MatrixD& draws);

// Bulk ESS: EffectiveSampleSize of the rank-normalised draws.
double BulkEss(const MatrixD& draws);

// Rank normalisation of the pooled draws: z = Phi^-1((r - 3/8) / (S + 1/4)), r the rank among
// all S draws (1 = smallest, ties get their average rank), Phi^-1 the standard normal quantile.
// Same shape as draws.
MatrixD RankNormalize(const MatrixD& draws);

// The worst dimension of a multivariate sample: chains[c] is chain c's draws (iterations x dim,
// as common/hmc.h returns them), all of one shape. A NaN diagnostic counts as the worst.
struct DrawsSummary {
  double max_rhat = 0;       // largest RankNormalizedRhat over dimensions
  int64_t max_rhat_dim = 0;
  double min_bulk_ess = 0;   // smallest BulkEss over dimensions
  int64_t min_bulk_ess_dim = 0;
};
DrawsSummary SummarizeDraws(const std::vector<MatrixD>& chains);

}  // namespace chorus

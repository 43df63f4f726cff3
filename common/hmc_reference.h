// A reference posterior predictive for a small classification problem from full-batch HMC
// (common/hmc.h) on an MLP's posterior (common/mlp_posterior.h), judged for convergence on its
// predictions, and the two measures Izmailov, Vikram, Hoffman & Wilson (ICML 2021, "What are
// Bayesian neural network posteriors really like?") use to compare a cheaper method's
// predictive against such a reference: top-1 agreement and total variation.
// Reproducibility: chain c draws from Philox(Derive(hmc.seed, c)) (common/hmc.h), so the result is
// a pure function of (network, data, starts, config), bit for bit, whatever `parallel` is.
// Thread safety: reentrant; the arguments must stay unchanged during the call.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/hmc.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/parallel_for.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

struct HmcReferenceConfig {
  HmcConfig hmc;               // chains, warm-up, draws, thinning, seed, trajectory (common/hmc.h)
  double prior_variance = 1;   // N(0, prior_variance I) over every parameter; > 0
};

struct HmcReference {
  MatrixD predictive;  // test rows x classes: the mean of softmax over every chain's kept draws
  // Function-space diagnostics: over every (test row, class) whose probability series is not
  // constant, the largest rank-normalised split R-hat and the smallest bulk ESS of that
  // probability, chains x kept draws (common/mcmc_diagnostics.h). A NaN diagnostic (a series
  // constant within every chain but not across them) counts as the worst; both are NaN when every
  // series is constant.
  double max_r_hat = 0, min_ess = 0;
  double mean_accept_probability = 0;  // mean over chains of HmcChain::mean_accept_probability
  int64_t divergences = 0;             // sampling divergences (not warm-up), all chains
  int64_t draws = 0;                   // kept draws, all chains: chains * (draws / thinning)
};

// The most probability values RunHmcReference keeps: chains * (draws / thinning) * rows * classes.
constexpr int64_t kMaxHmcReferenceSeriesValues = 100'000'000;  // 800 MB of double

// Samples the posterior of net's parameters given train (softmax likelihood, the prior of
// config) with config.hmc.chains HMC chains and returns the posterior predictive on test_x
// (rows x inputs) with its diagnostics.
// task must be kClassification; train must fit the network (MlpLogPosterior::Create's checks).
// starts: one initial parameter vector per chain (Mlp layout, net.ParameterCount() entries), or
// exactly one shared by all chains. Needs at least one test row and draws / thinning >= 4 (the
// split diagnostics' minimum). Chains run through `parallel` (null: one after another on this
// thread), each with its own MlpLogPosterior. `progress` (may be null) is called as RunHmcChain
// calls it, every config.hmc.progress_every iterations of each chain, from the threads running
// the chains at once; it must be thread-safe, and returning false stops the run (kCancelled).
// Memory: every kept draw's probabilities, 8 * chains * (draws / thinning) * rows * classes bytes
// (the diagnostics rank all chains' draws together), refused above kMaxHmcReferenceSeriesValues;
// plus, per chain running at once, its parameter draws, 8 * (draws / thinning) * parameters bytes.
// Fails with kInvalidInput on any input above (naming it), or with the first failing chain's
// status in chain order (e.g. a start where the log posterior is not finite).
StatusOr<HmcReference> RunHmcReference(const Mlp& net, Task task, const Split& train,
                                       const ConstMatrixRef& test_x,
                                       const std::vector<std::vector<double>>& starts,
                                       const HmcReferenceConfig& config, const ParallelFor* parallel,
                                       const HmcProgressFunction& progress = nullptr);

struct PredictiveAgreement {
  // Fraction of rows whose most probable class is the same (ties: the lowest index, as
  // std::max_element picks).
  double top1_agreement = 0;
  double mean_total_variation = 0;  // mean over rows of 0.5 * sum_k |p_k - q_k|
};

// reference and candidate: rows x classes probability matrices of one shape, at least one row and
// one class; kInvalidInput naming both shapes otherwise.
StatusOr<PredictiveAgreement> ComparePredictives(const MatrixD& reference, const MatrixD& candidate);

}  // namespace chorus

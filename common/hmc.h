// Full-batch Hamiltonian Monte Carlo: a reference sampler for small posteriors (Neal 2011, "MCMC
// using Hamiltonian dynamics", Handbook of MCMC; used for Bayesian networks by Izmailov et al.,
// ICML 2021, "What are Bayesian neural network posteriors really like?"). Identity mass matrix,
// leapfrog integration over a fixed trajectory length, a Metropolis accept/reject, and the step
// size tuned in warm-up by dual averaging (Hoffman & Gelman, JMLR 2014, sec. 3.2).
// Reproducibility: chain c draws from Philox(Derive(seed, c)) only, so every result is a pure
// function of (target, initial positions, config) whichever thread runs which chain.
// Thread safety: RunHmc runs its chains one after another on the calling thread; RunHmcChain is
// reentrant, so a caller may run chains on threads of its own, one target object per thread when
// the target keeps scratch state (common/mlp_posterior.h does).
#pragma once

#include <cstdint>
#include <functional>
#include <vector>

#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

// log pi(theta) up to an additive constant; writes d log pi / d theta into grad (resized to
// theta.size() by the callee). A non-finite value marks theta as outside the support: the sampler
// rejects any proposal that reaches it.
using LogDensityFunction =
    std::function<double(const std::vector<double>& theta, std::vector<double>& grad)>;

struct HmcConfig {
  // Changes the draws.
  uint64_t seed = 0;               // chain c uses Philox(Derive(seed, c))
  int chains = 4;                  // >= 1
  int warmup = 500;                // iterations that tune the step size, then discarded; >= 0
  int draws = 1000;                // iterations kept per chain before thinning; >= 1
  int thinning = 1;                // keep every thinning-th draw; >= 1
  double trajectory_length = 1.0;  // leapfrog time per iteration, in units of theta; > 0
  // Each iteration's length is trajectory_length * u, u uniform in [1 - jitter, 1 + jitter], to
  // break the periodic orbits a fixed length can fall into (Neal 2011, sec. 5.4.2); [0, 1).
  double trajectory_jitter = 0.0;
  double target_acceptance = 0.8;  // dual-averaging target of the mean Metropolis probability
                                   // (0.8: common practice); (0, 1)
  double initial_step = 0.1;       // the first step size; also the centre mu = log(10 eps0) of
                                   // dual averaging; > 0. Used throughout when warmup == 0.
  int max_leapfrog_steps = 1024;   // cap on ceil(length / step); a trajectory is shortened to it
  // Changes the progress reports only.
  int progress_every = 0;          // call the progress callback every N iterations; 0 = never
};

// Where a chain is, for the progress callback. Iterations count warm-up and sampling, from 1.
struct HmcProgress {
  int chain = 0;
  int64_t iteration = 0;
  int64_t total_iterations = 0;
  double step_size = 0;  // the step in use (during warm-up: the current dual-averaging step)
};

// Returns false to stop the run; RunHmc then returns kCancelled.
using HmcProgressFunction = std::function<bool(const HmcProgress&)>;

struct HmcChain {
  MatrixD draws;                      // kept draws x dim, row-major, in iteration order
  double mean_accept_probability = 0; // mean of min(1, exp(-dH)) over sampling iterations
  double accepted_fraction = 0;       // fraction of sampling proposals accepted
  double step_size = 0;               // the step used for sampling (dual averaging's eps-bar)
  int leapfrog_steps = 0;             // steps per iteration at that step (before jitter)
  int64_t divergences = 0;            // sampling iterations with dH > kDivergentEnergyError
  int64_t warmup_divergences = 0;     // the same during warm-up
};

struct HmcResult {
  std::vector<HmcChain> chains;  // one per config.chains, in chain order
};

// An energy error H(end) - H(start) above this (or non-finite) counts as a divergence.
constexpr double kDivergentEnergyError = 1000.0;

// Runs config.chains chains one after another. initial: one starting position per chain, or one
// shared by all. Fails with kInvalidInput on a bad config, on initial positions of the wrong count
// or of differing sizes, or on a start where log pi is not finite; with kCancelled when the progress
// callback returns false.
StatusOr<HmcResult> RunHmc(const LogDensityFunction& target,
                           const std::vector<std::vector<double>>& initial, const HmcConfig& config,
                           const HmcProgressFunction& progress = nullptr);

// Chain `chain` of RunHmc alone (same draws bit for bit), for callers that spread chains over
// threads. Checks as RunHmc, for this chain's start.
StatusOr<HmcChain> RunHmcChain(const LogDensityFunction& target, const std::vector<double>& initial,
                               const HmcConfig& config, int chain,
                               const HmcProgressFunction& progress = nullptr);

// A point in phase space with the log density and its gradient at theta.
struct PhaseState {
  std::vector<double> theta, momentum, grad;
  double log_density = 0;
};

// H = -log pi(theta) + |p|^2 / 2 (identity mass).
double Hamiltonian(const PhaseState& s);

// `steps` leapfrog steps of size `step` from s, in place (Neal 2011, sec. 5.2.3.3):
//   p <- p + (eps/2) grad;  theta <- theta + eps p;  p <- p + (eps/2) grad(theta).
// s.grad and s.log_density must hold the values at s.theta on entry, and hold them at the end.
// Returns false, leaving s part-way, when log pi turns non-finite on the way.
bool Leapfrog(const LogDensityFunction& target, double step, int steps, PhaseState& s);

}  // namespace chorus

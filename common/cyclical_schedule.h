// The cyclical step-size schedule of cyclical SG-MCMC (Zhang, Li, Zhang, Chen & Wilson, ICLR 2020,
// "Cyclical Stochastic Gradient MCMC for Bayesian Deep Learning"): K steps cut into cycles of
// L = ceil(K / M) steps; each cycle starts at the base step size, decays along a cosine, explores
// (no noise) for its first fraction beta and samples (noise on) for the rest, and collects
// samples_per_cycle samples spread over its sampling phase.
// Steps are 0-based here: step s is the paper's k = s + 1. With K not a multiple of M the last
// cycle is cut short at step K (as eq. 1 is written); its sample points at or after K are not
// collected. Thread safety: pure functions of their arguments.
#pragma once

#include <cstdint>

#include "common/status.h"

namespace chorus {

struct CyclicalSchedule {
  int64_t total_steps = 0;          // K, >= 1
  int cycles = 1;                   // M, in [1, K]
  double exploration_fraction = 0;  // beta, in [0, 1): the share of each cycle without noise
  int samples_per_cycle = 1;        // >= 1, at most the sampling steps of a full cycle
};

// Ok, or kInvalidInput naming the first field out of range: "cycles: expected ...".
Status ValidateCyclicalSchedule(const CyclicalSchedule& s);

// L = ceil(K / M), the steps of every cycle but possibly the last. Requires a valid schedule.
int64_t CycleLength(const CyclicalSchedule& s);

// Zhang et al. 2020, eq. 1: alpha0 / 2 (cos(pi (s mod L) / L) + 1) for step s in [0, K).
// Equals base at the first step of each cycle.
double CyclicalStepSize(const CyclicalSchedule& s, double base, int64_t step);

// Zhang et al. 2020, sec. 3: exploration while r = (s mod L) / L < beta, sampling after.
enum class CyclePhase { kExploration, kSampling };
CyclePhase PhaseOf(const CyclicalSchedule& s, int64_t step);

// Whether the parameters after step s are a sample. The sampling phase of a cycle holds the
// positions P0 .. L-1 (P0: the first with r >= beta, S = L - P0 of them); sample j of the cycle
// (j = 0 .. samples_per_cycle - 1, n = samples_per_cycle) sits at position
// P0 + floor((j + 1) S / n) - 1, so the last sample is the cycle's last step.
bool IsSampleStep(const CyclicalSchedule& s, int64_t step);

// The number of steps in [0, K) for which IsSampleStep holds.
int64_t SampleCount(const CyclicalSchedule& s);

}  // namespace chorus

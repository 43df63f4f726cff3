// One step of cyclical stochastic-gradient MCMC on a flat float parameter vector: SGLD (Welling &
// Teh, ICML 2011) or SGHMC (Chen, Fox & Guestrin, ICML 2014), under the cyclical schedule of
// Zhang et al. (ICLR 2020, common/cyclical_schedule.h), targeting a tempered posterior
// p_T(theta | D) ~ exp(-U(theta) / T) (cold posteriors: Wenzel et al., ICML 2020).
//
// How chorus's training quantities map onto the samplers. With N training rows, weight decay
// lambda and the mean minibatch NLL gradient g (what TrainingStep computes),
//   U(theta) = N * mean NLL(theta) + N lambda / 2 |theta|^2   (the prior: N(0, I / (N lambda))),
// and d = g + lambda theta is an unbiased estimate of grad U / N.
//   SGLD, Welling & Teh eq. 4 tempered (noise N(0, eps T)), with lr = eps N / 2:
//     theta <- theta - lr d + sqrt(2 lr T / N) xi
//   SGHMC, Chen et al. eq. 15 with beta_hat = 0 and noise N(0, 2 alpha eta T), with lr = eta N
//   and friction a = alpha; v is updated first and theta moves by the new v:
//     v <- (1 - a) v - lr d + sqrt(2 a lr T / N) xi;   theta <- theta + v
// xi ~ N(0, I). Exploration steps and T = 0 drop the noise: SGLD is then plain SGD, SGHMC
// heavy-ball SGD with momentum 1 - a (at a constant lr, v = -lr V for SgdStep's velocity V).
// Reproducibility: xi for parameter j at a step is a pure function of (the step's noise key, j),
// so a step gives the same bits however the caller splits the vector across threads.
// Thread safety: free functions over caller-owned buffers, reentrant.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

#include "common/cyclical_schedule.h"
#include "common/status.h"

namespace chorus {

enum class SgmcmcSampler { kSgld, kSghmc };
const char* SgmcmcSamplerName(SgmcmcSampler sampler);                    // "sgld", "sghmc"
std::optional<SgmcmcSampler> ParseSgmcmcSampler(const std::string& name);  // nullopt if unknown

// Cyclical SG-MCMC settings; all change the samples. The defaults are common-practice starting
// points (momentum 0.9 as in chorus's SGD), not tuned values.
struct SgmcmcConfig {
  SgmcmcSampler sampler = SgmcmcSampler::kSghmc;  // sgld | sghmc
  int cycles = 4;                     // M, >= 1 (and at most the run's steps)
  double exploration_fraction = 0.8;  // beta, in [0, 1): share of each cycle without noise
  int samples_per_cycle = 3;          // >= 1 (and at most the sampling steps of a cycle)
  double temperature = 1.0;           // T >= 0: 1 the posterior, < 1 colder, 0 no noise at all
  double friction = 0.1;              // sghmc: a in (0, 1], momentum 1 - a; unused by sgld
};

// Ok, or kInvalidInput naming the first bad field: "temperature: expected ..., found -1".
// The limits that depend on the run's length are checked by ValidateCyclicalSchedule.
Status ValidateSgmcmcConfig(const SgmcmcConfig& config);

// The schedule of a run of total_steps optimizer steps under `config`.
CyclicalSchedule CyclicalScheduleFor(const SgmcmcConfig& config, int64_t total_steps);

// Everything one step's update needs, in the units of the formulas above.
struct SgmcmcStep {
  SgmcmcSampler sampler = SgmcmcSampler::kSghmc;
  float lr = 0;            // the step's learning rate (eps N / 2 for SGLD, eta N for SGHMC)
  float weight_decay = 0;  // lambda
  float friction = 0;      // a (SGHMC)
  float noise_std = 0;     // sqrt(2 lr T / N) (SGLD) or sqrt(2 a lr T / N) (SGHMC); 0: no noise
  uint64_t noise_key = 0;  // the Philox stream xi is drawn from
};

// Step `step` (0-based, < schedule.total_steps) of a cyclical run: lr = CyclicalStepSize(
// schedule, base_lr, step), noise only in the sampling phase, noise_key = Derive(noise_seed,
// step). train_rows is N (>= 1); base_lr (> 0) and weight_decay (>= 0) as in OptimizerConfig.
SgmcmcStep PlanSgmcmcStep(const SgmcmcConfig& config, const CyclicalSchedule& schedule,
                          double base_lr, double weight_decay, int64_t train_rows,
                          uint64_t noise_seed, int64_t step);

// Applies step s to `count` consecutive parameters whose first has index `first` in the flat
// vector: g (gradient of the mean minibatch loss), w (parameters) and v (SGHMC velocity, zero at
// the start of a run; may be null for SGLD) all point at that first entry. xi for parameter j is
// the Box-Muller pair (r cos, r sin) of words (0, 1) of Philox(noise_key).Block(j / 4) for
// j % 4 in {0, 1}, of words (2, 3) for {2, 3}, with u1 = (word + 1) 2^-32, u2 = word 2^-32.
void SgmcmcEntries(const SgmcmcStep& s, int64_t first, const float* g, float* w, float* v,
                   int64_t count);

}  // namespace chorus

// Minibatch SGD with momentum, weight decay, gradient-norm clipping and learning-rate schedules.
// Thread safety: free functions over caller-owned buffers, reentrant.
#pragma once

#include <cstdint>

#include "common/config.h"

namespace chorus {

// An SGD step with momentum at given rates, on weights W and momentum V laid out row-major, ld
// floats apart (GemmSgdUpdate applies it to a product's tiles, common/gemm.h):
//   d = G + weight_decay W;  V <- momentum V + d;  W <- W - lr (nesterov ? d + momentum V : V).
// w and v are laid out like the product (row-major, ld floats apart).
struct SgdUpdate {
  float* w;
  float* v;
  int64_t ld;
  float lr, momentum, weight_decay;
  bool nesterov;
};

// The step of SgdUpdate on `count` consecutive entries of gradient g, weights w and momentum v
// (u.w, u.v and u.ld are not used). The one loop every SGD update in chorus runs; the project
// builds with -ffp-contract=off, so the vector kernels' multiplies and adds give the same bits.
void SgdEntries(const SgdUpdate& u, const float* g, float* w, float* v, int64_t count);

// One update of n parameters, PyTorch's SGD convention (torch.optim.SGD, v1.13):
//   d = g + wd * w;  v <- mu * v + d;  step = nesterov ? d + mu * v : v;  w <- w - lr * step.
// velocity starts at zero. g is the (already clipped) gradient.
void SgdStep(const OptimizerConfig& opt, float lr, int64_t n, const float* g, float* w,
             float* velocity);

// Rescales g in place so its L2 norm is at most max_norm (no-op when max_norm <= 0).
// Returns the norm before clipping (double accumulation).
double ClipGradientNorm(float* g, int64_t n, double max_norm);

// The learning rate for optimizer step `step` (0-based) of a run with `steps_per_epoch` steps:
//   constant: lr;  cosine: lr * 0.5 (1 + cos(pi * step / total_steps));
//   step: lr * factor^floor(epoch / every).
double ScheduledLearningRate(const TrainConfig& train, int64_t step, int64_t steps_per_epoch);

}  // namespace chorus

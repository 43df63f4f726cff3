// One minibatch SGD step of an Mlp: forward, head loss and gradient, backward, gradient clipping
// and the update, over buffers allocated once at construction; a step allocates nothing.
// Parts: with parts > 1 the minibatch's rows are cut into that many contiguous parts (part s
// holds rows [s * B / parts, (s + 1) * B / parts)), each part's gradient is computed on its own,
// possibly at the same time as the others, and the gradients are added in part order. The
// result depends on the number of parts (train.parts in the config), never on the threads.
// With one part, the part's dense products, element-wise passes and the update are cut into
// blocks across the threads `parallel` offers (common/mlp.h), with the same bits: a member
// granted an idle core trains faster and the same.
// With one part, no clipping and a minibatch of fewer than kFusedBelowRows rows the update is
// fused into the backward pass (Mlp::BackwardWithSgd), which gives the same bits as the separate
// gradient, SgdStep sequence and saves a pass over the gradient (faster there; slower on larger
// minibatches, which take the separate pass).
// Thread safety: a TrainingStep belongs to one member; Run must not be called concurrently.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/parallel_for.h"

namespace chorus {

class TrainingStep {
 public:
  // Minibatches of fewer rows take the fused update (one part, no clipping). Measured with
  // chorus-bench-step and two members at once (BENCHMARKS.md): at batch 32 the fused step was up
  // to 8% faster (its weight-gradient tiles are short, and it saves a pass over the gradient); at
  // batch 64, 128 and 512 the separate pass was as fast or 2-9% faster (the tiles' weight and
  // momentum misses stall a long k loop, where a streaming pass gets the hardware prefetcher).
  static constexpr int64_t kFusedBelowRows = 64;

  // max_rows: the largest minibatch Run will see; parts in [1, max_rows]. beta_nll: the
  // regression head's beta (common/heads.h GaussianNll); ignored for classification. products:
  // the precision of the forward and backward products (common/gemm.h).
  TrainingStep(const Mlp& net, Task task, const OptimizerConfig& optimizer, int64_t max_rows,
               int parts, float beta_nll = 0.0f,
               ProductPrecision products = ProductPrecision::kFp32);

  // x: rows x inputs (1 <= rows <= max_rows); labels (classification) or targets (regression) of
  // those rows, the other may be null. Updates params (ParameterCount floats) and the momentum
  // buffer at learning rate lr, and returns the minibatch's mean loss; if that is not finite,
  // returns it and leaves params and momentum untouched. parallel may be null (one part after
  // another on the calling thread).
  double Run(const ConstMatrixRef& x, const int32_t* labels, const float* targets, float lr,
             float* params, const ParallelFor* parallel);

  // The same minibatch gradient (of the mean loss, clipped as configured; never fused), handed to
  // update(context, grad, params) instead of the SGD step: for samplers with their own update
  // (common/sgmcmc_step.h). The momentum buffer is not used. Same return value as Run; update is
  // not called when the loss is not finite.
  using GradientUpdate = void (*)(void* context, const float* grad, float* params);
  double RunWithUpdate(const ConstMatrixRef& x, const int32_t* labels, const float* targets,
                       float* params, const ParallelFor* parallel, GradientUpdate update, void* context);

  // Zeroes the momentum buffer, as at construction: for continuing from parameters restored
  // from an earlier epoch, whose momentum was not kept.
  void ResetMomentum();

 private:
  struct Part {
    Mlp::Workspace workspace;
    Matrix grad_output;        // dL/dZ_L of the part's rows
    std::vector<float> grad;   // dL/dparams from the part's rows
    double loss = 0.0;         // the part's share of the minibatch's mean loss
  };
  struct PartJob;  // what one call of the parallel body needs
  static void RunPart(void* job, int64_t part);
  // Runs the parts and, unless fused or the loss is not finite, leaves the summed (and clipped)
  // gradient in parts_[0].grad. Returns the loss.
  double Gradient(const ConstMatrixRef& x, const int32_t* labels, const float* targets, float lr,
                  float* params, const ParallelFor* parallel, bool fused);

  const Mlp& net_;
  Task task_;
  OptimizerConfig optimizer_;
  float beta_nll_;
  std::vector<Part> parts_;
  std::vector<float> velocity_;
};

}  // namespace chorus

#include "common/training_step.h"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "common/heads.h"
#include "common/sgd.h"

namespace chorus {

struct TrainingStep::PartJob {
  TrainingStep* step;
  const ConstMatrixRef* x;
  const int32_t* labels;
  const float* targets;
  float* params;
  int64_t rows;
  float lr;
  bool fused;  // one part and no clipping: the update happens inside the backward pass
  const ParallelFor* within;  // for the products of a part: with one part, the step's threads
};

namespace {

// SgdStep (common/sgd.h) in blocks of whole cache lines, one block per thread of `parallel`:
// element-wise, so the bits do not depend on the blocks.
void SgdStepAcross(const ParallelFor* parallel, const OptimizerConfig& opt, float lr, int64_t n,
                   const float* g, float* w, float* velocity) {
  constexpr int64_t kLine = 16, kMinPerBlock = 64 * 1024;  // floats
  const int64_t blocks = std::min<int64_t>(ThreadsOf(parallel), n / kMinPerBlock);
  if (blocks <= 1) {
    SgdStep(opt, lr, n, g, w, velocity);
    return;
  }
  const int64_t lines = (n + kLine - 1) / kLine;
  ParallelForEach(parallel, blocks, [&](int64_t i) {
    const int64_t first = std::min(n, i * lines / blocks * kLine);
    const int64_t end = std::min(n, (i + 1) * lines / blocks * kLine);
    SgdStep(opt, lr, end - first, g + first, w + first, velocity + first);
  });
}

}  // namespace

TrainingStep::TrainingStep(const Mlp& net, Task task, const OptimizerConfig& optimizer,
                           int64_t max_rows, int parts, float beta_nll,
                           ProductPrecision products)
    : net_(net), task_(task), optimizer_(optimizer), beta_nll_(beta_nll), velocity_(net.ParameterCount(), 0.0f) {
  assert(parts >= 1 && parts <= max_rows);
  for (int s = 0; s < parts; ++s) {
    const int64_t part_rows = (s + 1) * max_rows / parts - s * max_rows / parts;
    parts_.push_back(Part{net.MakeWorkspace(part_rows, products), Matrix(part_rows, net.widths().back()),
                          std::vector<float>(net.ParameterCount()), 0.0});
  }
}

void TrainingStep::RunPart(void* context, int64_t s) {
  const PartJob& job = *static_cast<const PartJob*>(context);
  TrainingStep& self = *job.step;
  Part& part = self.parts_[static_cast<size_t>(s)];
  const int64_t parts = static_cast<int64_t>(self.parts_.size());
  const int64_t begin = s * job.rows / parts, rows = (s + 1) * job.rows / parts - begin;
  if (rows == 0) {  // a minibatch smaller than the number of parts
    part.loss = 0.0;
    std::fill(part.grad.begin(), part.grad.end(), 0.0f);
    return;
  }
  const auto x = job.x->middleRows(begin, rows);
  const auto out = self.net_.Forward(job.params, x, part.workspace, job.within);
  auto grad_out = part.grad_output.topRows(rows);
  part.loss = self.task_ == Task::kClassification
                  ? SoftmaxCrossEntropy(out, job.labels + begin, grad_out, job.rows)
                  : GaussianNll(out, job.targets + begin, grad_out, job.rows, self.beta_nll_);
  if (!std::isfinite(part.loss)) return;
  if (job.fused) {
    self.net_.BackwardWithSgd(job.params, x, grad_out, part.workspace, part.grad.data(),
                              self.optimizer_, job.lr, self.velocity_.data(), job.within);
  } else {
    self.net_.Backward(job.params, x, grad_out, part.workspace, part.grad.data(), job.within);
  }
}

double TrainingStep::Run(const ConstMatrixRef& x, const int32_t* labels, const float* targets,
                         float lr, float* params, const ParallelFor* parallel) {
  const bool fused = parts_.size() == 1 && !(optimizer_.clip_norm > 0.0) && x.rows() < kFusedBelowRows;
  const double loss = Gradient(x, labels, targets, lr, params, parallel, fused);
  if (!std::isfinite(loss) || fused) return loss;
  SgdStepAcross(parallel, optimizer_, lr, net_.ParameterCount(),
                parts_[0].grad.data(), params, velocity_.data());
  return loss;
}

double TrainingStep::RunWithUpdate(const ConstMatrixRef& x, const int32_t* labels, const float* targets,
                                   float* params, const ParallelFor* parallel, GradientUpdate update,
                                   void* context) {
  const double loss = Gradient(x, labels, targets, 0.0f, params, parallel, false);
  if (std::isfinite(loss)) update(context, parts_[0].grad.data(), params);
  return loss;
}

double TrainingStep::Gradient(const ConstMatrixRef& x, const int32_t* labels, const float* targets,
                              float lr, float* params, const ParallelFor* parallel, bool fused) {
  const int parts = static_cast<int>(parts_.size());
  PartJob job{this, &x, labels, targets, params, x.rows(), lr, fused, parts == 1 ? parallel : nullptr};
  if (parallel != nullptr && parts > 1) {
    parallel->Run(parts, &TrainingStep::RunPart, &job);
  } else {
    for (int64_t s = 0; s < parts; ++s) RunPart(&job, s);
  }
  double loss = 0.0;
  for (const Part& part : parts_) loss += part.loss;  // in part order
  if (!std::isfinite(loss) || fused) return loss;

  const int64_t n = net_.ParameterCount();
  float* grad = parts_[0].grad.data();
  for (int s = 1; s < parts; ++s) {  // in part order: the sum does not depend on the threads
    const float* g = parts_[s].grad.data();
    for (int64_t i = 0; i < n; ++i) grad[i] += g[i];
  }
  if (optimizer_.clip_norm > 0.0) ClipGradientNorm(grad, n, optimizer_.clip_norm);
  return loss;
}

void TrainingStep::ResetMomentum() { std::fill(velocity_.begin(), velocity_.end(), 0.0f); }

}  // namespace chorus

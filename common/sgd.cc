#include "common/sgd.h"

#include <cmath>

namespace chorus {

void SgdEntries(const SgdUpdate& u, const float* g, float* w, float* v, int64_t count) {
  for (int64_t j = 0; j < count; ++j) {
    const float d = g[j] + u.weight_decay * w[j];
    const float nv = u.momentum * v[j] + d;
    v[j] = nv;
    w[j] -= u.lr * (u.nesterov ? d + u.momentum * nv : nv);
  }
}

void SgdStep(const OptimizerConfig& opt, float lr, int64_t n, const float* g, float* w,
             float* velocity) {
  const SgdUpdate u{w, velocity, n, lr, static_cast<float>(opt.momentum),
                    static_cast<float>(opt.weight_decay), opt.nesterov};
  SgdEntries(u, g, w, velocity, n);
}

double ClipGradientNorm(float* g, int64_t n, double max_norm) {
  // Eight partial sums in a fixed pattern: the loop vectorises and the result depends only on g.
  constexpr int kLanes = 8;
  double partial[kLanes] = {};
  int64_t i = 0;
  for (; i + kLanes <= n; i += kLanes) {
    for (int l = 0; l < kLanes; ++l) partial[l] += static_cast<double>(g[i + l]) * g[i + l];
  }
  for (int l = 0; i < n; ++i, ++l) partial[l] += static_cast<double>(g[i]) * g[i];
  double sq = 0.0;
  for (double p : partial) sq += p;
  const double norm = std::sqrt(sq);
  if (max_norm > 0.0 && norm > max_norm) {
    const float scale = static_cast<float>(max_norm / norm);
    for (int64_t i = 0; i < n; ++i) g[i] *= scale;
  }
  return norm;
}

double ScheduledLearningRate(const TrainConfig& train, int64_t step, int64_t steps_per_epoch) {
  const double lr = train.optimizer.lr;
  switch (train.schedule.kind) {
    case ScheduleKind::kConstant:
      return lr;
    case ScheduleKind::kCosine: {
      const double total = static_cast<double>(steps_per_epoch) * train.epochs;
      return lr * 0.5 * (1.0 + std::cos(M_PI * static_cast<double>(step) / total));
    }
    case ScheduleKind::kStep: {
      const int64_t epoch = step / steps_per_epoch;
      return lr * std::pow(train.schedule.step_factor, epoch / train.schedule.step_every_epochs);
    }
  }
  return lr;
}

}  // namespace chorus

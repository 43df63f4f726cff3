// The training step allocates nothing after warm-up (issue 6's property, checked with the counting
// allocator of tests/alloc/counting_allocator.h rather than by timing): one part on the calling
// thread, and several parts through oneTBB as a worker runs them.
#include <gtest/gtest.h>
#include <tbb/parallel_for.h>
#include <tbb/task_arena.h>

#include <atomic>
#include <memory>
#include <vector>

#include "common/gemm.h"
#include "common/mlp.h"
#include "common/rng.h"
#include "common/training_step.h"
#include "tests/alloc/counting_allocator.h"
#include "execution/tbb_parallel_for.h"

namespace chorus {
namespace {

constexpr int64_t kBatch = 96;
static_assert(kBatch >= TrainingStep::kFusedBelowRows && kBatch - 50 < TrainingStep::kFusedBelowRows,
              "full minibatches take the separate SGD pass, the short one the fused pass");

struct Problem {
  Mlp net{{300, 128, 64, 10}, Activation::kRelu};
  Matrix x = Matrix(kBatch, 300);
  std::vector<int32_t> labels = std::vector<int32_t>(kBatch);
  std::vector<float> targets = std::vector<float>(kBatch);
  std::vector<float> params = std::vector<float>(net.ParameterCount());

  Problem() {
    Philox rng(5);
    for (int64_t i = 0; i < x.rows(); ++i) {
      for (int64_t j = 0; j < x.cols(); ++j) x(i, j) = static_cast<float>(rng.NextNormal());
      labels[i] = static_cast<int32_t>(rng.NextBelow(10));
      targets[i] = static_cast<float>(rng.NextNormal());
    }
    net.Initialize(6, params.data());
  }
};

// Allocations made by `steps` training steps after `warmup` uncounted ones.
int64_t AllocationsPerSteps(Problem& p, TrainingStep& step, const ParallelFor* parallel,
                            int warmup, int steps) {
  for (int i = 0; i < warmup; ++i) {
    step.Run(p.x, p.labels.data(), p.targets.data(), 0.01f, p.params.data(), parallel);
  }
  testing::StartCountingAllocations();
  for (int i = 0; i < steps; ++i) {
    // A short last minibatch as well as full ones, as an epoch has; with one part the full
    // ones take the separate SGD pass and the short one the fused one.
    const int64_t rows = i % 5 == 4 ? kBatch - 50 : kBatch;
    step.Run(p.x.topRows(rows), p.labels.data(), p.targets.data(), 0.01f, p.params.data(), parallel);
  }
  return testing::StopCountingAllocations();
}

TEST(TrainingStepAllocations, TheCounterSeesAnAllocation) {
  testing::StartCountingAllocations();
  auto p = std::make_unique<std::vector<float>>(1000);
  EXPECT_GE(testing::StopCountingAllocations(), 1);
}

TEST(TrainingStepAllocations, NoneAfterWarmUpWithOnePart) {
  Problem p;
  OptimizerConfig opt;
  opt.clip_norm = 1.0;  // clipping on: its norm pass is part of the step
  TrainingStep step(p.net, Task::kClassification, opt, kBatch, 1);
  EXPECT_EQ(AllocationsPerSteps(p, step, nullptr, 2, 20), 0);
}

// bf16 products (where the CPU has them): the conversion buffers are the thread's packing
// buffers, made on the first call.
TEST(TrainingStepAllocations, NoneAfterWarmUpWithBf16Products) {
  if (!Bf16ProductsAvailable()) GTEST_SKIP() << "this CPU has no AVX512_BF16";
  Problem p;
  TrainingStep step(p.net, Task::kClassification, OptimizerConfig{}, kBatch, 1, 0.0f,
                    ProductPrecision::kBf16);
  EXPECT_EQ(AllocationsPerSteps(p, step, nullptr, 2, 20), 0);
}

TEST(TrainingStepAllocations, NoneAfterWarmUpForRegression) {
  Problem p;
  p.net = Mlp({300, 128, 64, 2}, Activation::kGelu);
  p.params.assign(p.net.ParameterCount(), 0.0f);
  p.net.Initialize(7, p.params.data());
  TrainingStep step(p.net, Task::kRegression, OptimizerConfig{}, kBatch, 1);
  EXPECT_EQ(AllocationsPerSteps(p, step, nullptr, 2, 20), 0);
}

// A convolutional member: two stages (max and average pooling) on 1 x 12 x 25 images (300
// features), then the dense layers; more rows than one unfolding chunk.
TEST(TrainingStepAllocations, NoneAfterWarmUpWithConvolutionStages) {
  Problem p;
  const ConvFront front({1, 12, 25}, {{6, 3, Pooling::kMax}, {8, 3, Pooling::kAverage}}, Activation::kRelu);
  p.net = Mlp({static_cast<int>(front.Outputs()), 32, 10}, Activation::kRelu, front);
  p.params.assign(p.net.ParameterCount(), 0.0f);
  p.net.Initialize(8, p.params.data());
  TrainingStep step(p.net, Task::kClassification, OptimizerConfig{}, kBatch, 1);
  EXPECT_EQ(AllocationsPerSteps(p, step, nullptr, 2, 20), 0);
}

// Each thread's first product allocates its packing buffers (common/gemm.cc): make every thread
// of the arena do one, all at once, so the warm-up does not depend on how tasks were stolen.
void WarmUpEveryThread(tbb::task_arena& arena) {
  const int threads = arena.max_concurrency();
  std::atomic<int> arrived{0};
  arena.execute([&] {
    tbb::parallel_for(0, threads, [&](int) {
      const Matrix a = Matrix::Ones(4, 4);
      Matrix c(4, 4);
      Gemm(Transpose::kNo, Transpose::kNo, 1.0f, a, a, 0.0f, c);
      arrived.fetch_add(1);
      while (arrived.load() < threads) {
      }
    }, tbb::simple_partitioner());
  });
}

TEST(TrainingStepAllocations, NoneAfterWarmUpWithPartsOnTbbThreads) {
  Problem p;
  TrainingStep step(p.net, Task::kClassification, OptimizerConfig{}, kBatch, 3);
  const TbbParallelFor parallel;
  tbb::task_arena arena(2);
  WarmUpEveryThread(arena);
  int64_t allocations = -1;
  arena.execute([&] { allocations = AllocationsPerSteps(p, step, &parallel, 5, 20); });
  EXPECT_EQ(allocations, 0);
}

}  // namespace
}  // namespace chorus

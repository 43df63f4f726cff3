// common/training_step.h: cutting a minibatch into parts changes only the rounding of the
// gradient (the parts' gradients add up to the batch's: the loss is a sum over rows), the result
// for a given number of parts does not depend on the threads that run them (with fp32 and with
// bf16 products), and a non-finite loss leaves the parameters alone.
#include <gtest/gtest.h>
#include <tbb/task_arena.h>

#include <atomic>
#include <cmath>
#include <string>
#include <thread>
#include <limits>
#include <utility>
#include <vector>

#include "common/gemm.h"
#include "common/mlp.h"
#include "common/rng.h"
#include "common/training_step.h"
#include "execution/tbb_parallel_for.h"

namespace chorus {
namespace training_step_test {

constexpr int64_t kRows = 50;

struct Batch {
  Matrix x = Matrix(kRows, 20);
  std::vector<int32_t> labels = std::vector<int32_t>(kRows);
};

Batch RandomBatch(uint64_t seed) {
  Batch b;
  Philox rng(seed);
  for (int64_t i = 0; i < kRows; ++i) {
    for (int64_t j = 0; j < b.x.cols(); ++j) b.x(i, j) = static_cast<float>(rng.NextNormal());
    b.labels[i] = static_cast<int32_t>(rng.NextBelow(4));
  }
  return b;
}

const Mlp& Net() {
  static const Mlp net({20, 32, 16, 4}, Activation::kTanh);
  return net;
}

// Parameters after `steps` steps on fresh random batches, and the last step's loss.
std::vector<float> Train(int parts, const ParallelFor* parallel, int steps, double* loss = nullptr,
                         const OptimizerConfig& optimizer = OptimizerConfig{},
                         ProductPrecision products = ProductPrecision::kFp32) {
  std::vector<float> params(Net().ParameterCount());
  Net().Initialize(3, params.data());
  TrainingStep step(Net(), Task::kClassification, optimizer, kRows, parts, 0.0f, products);
  for (int s = 0; s < steps; ++s) {
    const Batch b = RandomBatch(100 + s);
    const double l = step.Run(b.x, b.labels.data(), nullptr, 0.1f, params.data(), parallel);
    if (loss != nullptr) *loss = l;
  }
  return params;
}

// How far `a` moved any parameter from Train's starting point, and how far b is from a: the
// largest entry of each difference.
std::pair<double, double> MovedAndDiffer(const std::vector<float>& a, const std::vector<float>& b) {
  std::vector<float> start(Net().ParameterCount());
  Net().Initialize(3, start.data());
  double moved = 0, differ = 0;
  for (size_t i = 0; i < a.size(); ++i) {
    moved = std::max(moved, static_cast<double>(std::abs(a[i] - start[i])));
    differ = std::max(differ, static_cast<double>(std::abs(a[i] - b[i])));
  }
  return {moved, differ};
}

TEST(TrainingStepTest, PartsAddUpToTheWholeBatchUpToRounding) {
  double loss_whole = 0, loss_parts = 0;
  const std::vector<float> whole = Train(1, nullptr, 1, &loss_whole);
  const std::vector<float> parts = Train(4, nullptr, 1, &loss_parts);
  EXPECT_NEAR(loss_parts, loss_whole, 1e-12 * std::abs(loss_whole) + 1e-12);
  const auto [moved, differ] = MovedAndDiffer(whole, parts);
  EXPECT_GT(moved, 1e-4);            // the step did something
  EXPECT_LT(differ, 1e-5 * moved);   // and both ways did the same thing up to float rounding
}

TEST(TrainingStepTest, ResultDependsOnPartsNotOnThreads) {
  for (ProductPrecision products : {ProductPrecision::kFp32, ProductPrecision::kBf16}) {
    const OptimizerConfig optimizer;
    const std::vector<float> serial = Train(3, nullptr, 4, nullptr, optimizer, products);
    const TbbParallelFor parallel;
    for (int threads : {1, 2, 4}) {
      tbb::task_arena arena(threads);
      std::vector<float> threaded;
      arena.execute([&] { threaded = Train(3, &parallel, 4, nullptr, optimizer, products); });
      EXPECT_EQ(threaded, serial) << threads << " threads, " << ProductPrecisionName(products);
    }
  }
}

// bf16 products (where the CPU has them) move the weights as fp32 products do, up to the
// rounding of the operands to 8 significant bits: after one step the two differ by well under a
// tenth of how far the step moved them, and they do differ.
TEST(TrainingStepTest, Bf16StepFollowsTheFp32StepUpToOperandRounding) {
  if (!Bf16ProductsAvailable()) GTEST_SKIP() << "this CPU has no AVX512_BF16";
  const OptimizerConfig optimizer;
  const std::vector<float> fp32 = Train(1, nullptr, 1, nullptr, optimizer, ProductPrecision::kFp32);
  const std::vector<float> bf16 = Train(1, nullptr, 1, nullptr, optimizer, ProductPrecision::kBf16);
  const auto [moved, differ] = MovedAndDiffer(fp32, bf16);
  EXPECT_GT(moved, 1e-4);
  EXPECT_GT(differ, 0.0);
  EXPECT_LT(differ, 0.1 * moved);
}

// One part, no clipping and a minibatch under TrainingStep::kFusedBelowRows rows takes the fused
// path (the update inside the backward pass); a clipping threshold the gradient never reaches
// takes the separate one. Both must give the same bits.
static_assert(kRows < TrainingStep::kFusedBelowRows, "the test minibatch must take the fused path");
TEST(TrainingStepTest, FusedUpdateGivesTheSameBitsAsTheSeparateOne) {
  for (bool nesterov : {false, true}) {
    OptimizerConfig fused;
    fused.nesterov = nesterov;
    OptimizerConfig separate = fused;
    separate.clip_norm = 1e30;
    for (ProductPrecision products : {ProductPrecision::kFp32, ProductPrecision::kBf16}) {
      EXPECT_EQ(Train(1, nullptr, 5, nullptr, fused, products),
                Train(1, nullptr, 5, nullptr, separate, products))
          << "nesterov " << nesterov << ", " << ProductPrecisionName(products);
    }
  }
}

// Runs each item on a thread of its own and counts the calls that had more than one item.
class ThreadPerItem final : public ParallelFor {
 public:
  void Run(int64_t count, void (*body)(void*, int64_t), void* context) const override {
    if (count > 1) ++cut_calls;
    std::vector<std::thread> threads;
    for (int64_t i = 0; i < count; ++i) threads.emplace_back(body, context, i);
    for (std::thread& t : threads) t.join();
  }
  int Threads() const override { return 2; }
  mutable std::atomic<int> cut_calls{0};
};

// With one part, a step given threads cuts its products and passes into blocks (common/mlp.h);
// the parameters must come out bit for bit as on one thread: on the fused path (batch 32), the
// separate one (batch 128), with bf16 products, relu and tanh, and with oneTBB arenas of 2 and 3
// threads. The network is large enough that its products are cut.
TEST(TrainingStepTest, OnePartGivesTheSameBitsOnAnyThreads) {
  struct Case {
    int64_t rows;
    Activation activation;
  };
  for (const Case& c : {Case{32, Activation::kRelu}, Case{128, Activation::kRelu},
                        Case{128, Activation::kTanh}}) {
    const int64_t rows = c.rows;  // named, not bound: lambdas below capture them
    const Activation activation = c.activation;
    const Mlp net({300, 256, 128, 10}, activation);
    Philox rng(rows);
    Matrix x(rows, 300);
    std::vector<int32_t> labels(static_cast<size_t>(rows));
    for (int64_t i = 0; i < rows; ++i) {
      for (int64_t j = 0; j < x.cols(); ++j) x(i, j) = static_cast<float>(rng.NextNormal());
      labels[static_cast<size_t>(i)] = static_cast<int32_t>(rng.NextBelow(10));
    }
    for (ProductPrecision products : {ProductPrecision::kFp32, ProductPrecision::kBf16}) {
      const auto train = [&](const ParallelFor* parallel) {
        std::vector<float> params(net.ParameterCount());
        net.Initialize(5, params.data());
        OptimizerConfig optimizer;
        optimizer.nesterov = true;
        TrainingStep step(net, Task::kClassification, optimizer, rows, 1, 0.0f, products);
        for (int s = 0; s < 3; ++s) step.Run(x, labels.data(), nullptr, 0.05f, params.data(), parallel);
        return params;
      };
      const std::string where = std::to_string(rows) + " rows, " + ProductPrecisionName(products) +
                                (activation == Activation::kTanh ? ", tanh" : ", relu");
      const std::vector<float> serial = train(nullptr);
      const ThreadPerItem per_item;
      EXPECT_EQ(train(&per_item), serial) << where << ", a thread per block";
      EXPECT_GE(per_item.cut_calls.load(), 3 * 2) << where << ": the step was not cut";
      const TbbParallelFor tbb;
      for (int threads : {2, 3}) {
        tbb::task_arena arena(threads);
        std::vector<float> threaded;
        arena.execute([&] { threaded = train(&tbb); });
        EXPECT_EQ(threaded, serial) << where << ", " << threads << " oneTBB threads";
      }
    }
  }
}

TEST(TrainingStepTest, NonFiniteLossLeavesParametersAlone) {
  std::vector<float> params(Net().ParameterCount());
  Net().Initialize(3, params.data());
  const std::vector<float> before = params;
  Batch b = RandomBatch(7);
  b.x(kRows - 1, 0) = std::numeric_limits<float>::quiet_NaN();
  TrainingStep step(Net(), Task::kClassification, OptimizerConfig{}, kRows, 2);
  EXPECT_FALSE(std::isfinite(step.Run(b.x, b.labels.data(), nullptr, 0.1f, params.data(), nullptr)));
  EXPECT_EQ(params, before);
}

}  // namespace training_step_test
}  // namespace chorus

// chorus-bench-step: where one training step's time goes, 784-512-512-10 at batch B, one thread.
//
// Five pieces of work, each adding something to the one before, timed in one process and taken
// in turn a block of about 2048 samples at a time (30 blocks each), so that a slow spell of the
// machine falls on all of them alike; separate processes minutes apart differ by up to 30% on a
// shared virtual machine, more than the differences measured here.
//   products:    the eight matrix products of a step, back to back on chained buffers
//                (bench/chained_products.h with chorus::Gemm, as chorus-bench-gemm's
//                gemm-sequence);
//   backward:    Mlp::Forward, the softmax cross-entropy head and Mlp::Backward, the gradient
//                written out (adds bias, activation, head, bias gradients);
//   step_fused:  forward, head and Mlp::BackwardWithSgd: the SGD step fused into the
//                weight-gradient tiles (adds reading and writing weights and momentum);
//   step_split:  backward, then SgdStep over all parameters: the same update as a separate pass;
//   gather_step: the minibatch's rows copied from a shuffled 8192-row matrix, then
//                TrainingStep::Run with one part, which takes one of the two above by the
//                minibatch's rows (what TrainMember does per step, less the schedule).
// With --pair, two threads each run all of the above on a network of their own, meeting before
// every timed block so that both run the same piece at the same time: as two members training
// at once share the machine, piece by piece (what each piece loses to the other member).
// Usage: chorus-bench-step [fp32|bf16] [--pair] [BATCH...]   (default fp32, 32 128 512): the
// precision of every product (common/gemm.h; bf16 needs AVX512_BF16).
// Output, per batch and piece (and with --pair, per thread):
//   chorus-step batch=B piece=NAME median_us=T best_us=T samples_per_s=R products=P
//               [together=2 thread=T]   (R from the median)
#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <functional>
#include <mutex>
#include <numeric>
#include <thread>
#include <vector>

#include "bench/chained_products.h"
#include "common/heads.h"
#include "common/mlp.h"
#include "common/rng.h"
#include "common/sgd.h"
#include "common/training_step.h"

namespace chorus {
namespace {

using Clock = std::chrono::steady_clock;

constexpr int64_t kRows = 8192;  // the training matrix the minibatches are gathered from
constexpr int kFeatures = 784, kClasses = 10;
constexpr int kBlocks = 30;
constexpr int64_t kSamplesPerBlock = 2048;

// Where the threads of --pair meet before each timed block.
class Barrier {
 public:
  explicit Barrier(int parties) : parties_(parties) {}
  void Wait() {
    std::unique_lock<std::mutex> lock(mu_);
    const int64_t generation = generation_;
    if (++arrived_ == parties_) {
      arrived_ = 0;
      ++generation_;
      cv_.notify_all();
      return;
    }
    cv_.wait(lock, [&] { return generation_ != generation; });
  }

 private:
  std::mutex mu_;
  std::condition_variable cv_;
  const int parties_;
  int arrived_ = 0;
  int64_t generation_ = 0;
};

double Median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

// pair: null for one thread, else the barrier shared with the other thread (number `thread`).
void MeasureBatch(int64_t batch, ProductPrecision precision, Barrier* pair, int thread) {
  Philox rng(Derive(1, "bench-step"));
  const Mlp net({kFeatures, 512, 512, kClasses}, Activation::kRelu);
  std::vector<float> params(net.ParameterCount()), grad(net.ParameterCount()),
      velocity(net.ParameterCount(), 0.0f);
  net.Initialize(Derive(2, "init"), params.data());
  const Matrix data = Matrix::Random(kRows, kFeatures);  // values do not change the work
  std::vector<int32_t> all_labels(kRows);
  for (int32_t& label : all_labels) label = static_cast<int32_t>(rng.NextBelow(kClasses));
  std::vector<int64_t> order(kRows);
  std::iota(order.begin(), order.end(), int64_t{0});
  for (int64_t i = kRows - 1; i > 0; --i) {
    std::swap(order[i], order[rng.NextBelow(static_cast<uint64_t>(i) + 1)]);
  }

  OptimizerConfig optimizer;
  optimizer.momentum = 0.9;
  optimizer.weight_decay = 5e-4;
  const float lr = 1e-4f;  // small, so that thousands of steps on one minibatch stay finite
  TrainingStep step(net, Task::kClassification, optimizer, batch, 1, 0.0f, precision);
  Mlp::Workspace ws = net.MakeWorkspace(batch, precision);
  Matrix grad_output(batch, kClasses);
  Matrix xb = data.topRows(batch);
  std::vector<int32_t> labels(all_labels.begin(), all_labels.begin() + batch);
  ChainedProducts products({kFeatures, 512, 512, kClasses}, batch);
  products.x = xb;
  int64_t next_row = 0;

  // Forward and the head, leaving dL/dZ_L in grad_output.
  const auto forward_head = [&] {
    const auto out = net.Forward(params.data(), xb, ws);
    SoftmaxCrossEntropy(out, labels.data(), grad_output, batch);
  };
  const auto backward = [&] {
    forward_head();
    net.Backward(params.data(), xb, grad_output, ws, grad.data());
  };
  struct Piece {
    const char* name;
    std::function<void()> run;
    std::vector<double> seconds;  // per step, one per block
  };
  std::vector<Piece> pieces = {
      {"products",
       [&] {
         products.Run(precision == ProductPrecision::kBf16 ? ChorusProductAt<ProductPrecision::kBf16>
                                                           : ChorusProduct);
       },
       {}},
      {"backward", backward, {}},
      {"step_fused",
       [&] {
         forward_head();
         net.BackwardWithSgd(params.data(), xb, grad_output, ws, grad.data(), optimizer, lr,
                             velocity.data());
       },
       {}},
      {"step_split",
       [&] {
         backward();
         SgdStep(optimizer, lr, net.ParameterCount(), grad.data(), params.data(), velocity.data());
       },
       {}},
      {"gather_step",
       [&] {
         if (next_row + batch > kRows) next_row = 0;
         for (int64_t r = 0; r < batch; ++r) {
           const int64_t src = order[next_row + r];
           std::copy_n(data.row(src).data(), kFeatures, xb.row(r).data());
           labels[r] = all_labels[src];
         }
         next_row += batch;
         step.Run(xb, labels.data(), nullptr, lr, params.data(), nullptr);
       },
       {}},
  };
  const int64_t steps = std::max<int64_t>(1, kSamplesPerBlock / batch);
  for (Piece& p : pieces) p.run();  // warm-up: first-touch page faults, packing buffers
  for (int block = 0; block < kBlocks; ++block) {
    for (Piece& p : pieces) {
      if (pair != nullptr) pair->Wait();
      const auto start = Clock::now();
      for (int64_t s = 0; s < steps; ++s) p.run();
      p.seconds.push_back(std::chrono::duration<double>(Clock::now() - start).count() / steps);
    }
  }
  for (const Piece& p : pieces) {
    const double median = Median(p.seconds);
    const double best = *std::min_element(p.seconds.begin(), p.seconds.end());
    char together[32] = "";
    if (pair != nullptr) std::snprintf(together, sizeof together, " together=2 thread=%d", thread);
    std::printf(
        "chorus-step batch=%lld piece=%s median_us=%.1f best_us=%.1f samples_per_s=%.0f products=%s%s\n",
        static_cast<long long>(batch), p.name, median * 1e6, best * 1e6,
        static_cast<double>(batch) / median, ProductPrecisionName(precision), together);
  }
  std::fflush(stdout);
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) {
  std::vector<int64_t> batches;
  int first = 1;
  const auto precision = chorus::ParseProductPrecision(argc > 1 ? argv[1] : "");
  if (precision) first = 2;
  const bool pair = argc > first && std::strcmp(argv[first], "--pair") == 0;
  if (pair) ++first;
  for (int i = first; i < argc; ++i) {
    const long long b = std::atoll(argv[i]);
    if (b < 1 || b > 8192) {
      std::fprintf(stderr,
                   "usage: chorus-bench-step [fp32|bf16] [--pair] [BATCH...]   (batch sizes 1-8192)\n");
      return 2;
    }
    batches.push_back(b);
  }
  const auto products = precision.value_or(chorus::ProductPrecision::kFp32);
  if (products == chorus::ProductPrecision::kBf16 && !chorus::Bf16ProductsAvailable()) {
    std::fprintf(stderr, "chorus-bench-step: this CPU has no AVX512_BF16; bf16 would run as fp32\n");
    return 2;
  }
  if (batches.empty()) batches = {32, 128, 512};
  for (int64_t b : batches) {
    if (!pair) {
      chorus::MeasureBatch(b, products, nullptr, 0);
      continue;
    }
    chorus::Barrier barrier(2);
    std::thread other([&] { chorus::MeasureBatch(b, products, &barrier, 1); });
    chorus::MeasureBatch(b, products, &barrier, 0);
    other.join();
  }
  return 0;
}

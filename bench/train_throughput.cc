// chorus-bench-train: training throughput of ensemble members on this machine.
//
// Network 784-512-512-10 (NETWORK mlp, the default) or a convolutional member (NETWORK conv:
// 1 x 28 x 28 images, 3 x 3 convolutions to 16 then 32 channels, each with 2 x 2 max pooling,
// then 1568-128-10, as configs/fashion_mnist_conv.yaml), relu, batch B (default 128), SGD (momentum 0.9, weight decay 5e-4,
// cosine schedule), on synthetic data: 8192 standard-normal rows with uniformly random labels. Each
// member runs through TrainMember, the same code a worker runs for a job (shuffle, gather,
// forward, head, backward, schedule, SGD step), single-threaded. Three configurations:
//   threads=1: one member on a tbb::task_arena of 1;
//   threads=2: two members at once on a tbb::task_arena of 2 (as execution/job_slots.cc does);
//   granted, threads=2 members=1: one member given both threads (its products cut across them,
//     as a job granted an idle slot's core runs: execution/job_slots.h).
// The first epoch is a warm-up (page faults, caches, frequency ramp). The epoch-end callbacks
// give the timed window: from the end of each member's first epoch to the end of its last, and
// the reported rate is all timed samples divided by the union of the members' windows.
// PRODUCTS fp32 (the default) or bf16 sets train.products (common/gemm.h); bf16 needs a CPU with
// AVX512_BF16 (the bench refuses elsewhere rather than time fp32 under the bf16 name).
// Usage: chorus-bench-train [BATCH [TIMED_EPOCHS [NETWORK [PRODUCTS]]]]   (defaults 128, 5, mlp, fp32)
// Output: one "machine:" line, then per configuration one line
//   chorus threads=T members=T batch=B samples_per_s=R gflops=G flops_per_sample=F [network=conv]
//   [products=bf16]
// and for the third the same fields after "granted" instead of "chorus".
#include <sched.h>
#include <tbb/parallel_for.h>
#include <tbb/task_arena.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "common/gemm.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/rng.h"
#include "execution/helper_team.h"

namespace chorus {
namespace {

using Clock = std::chrono::steady_clock;

constexpr int64_t kTrainRows = 8192;
constexpr int64_t kHeldOutRows = 128;  // validation and test rows TrainMember predicts at the end
constexpr int kFeatures = 784;
constexpr int kClasses = 10;
constexpr int kWarmupEpochs = 1;

// FLOPs of one training sample through layers in -> out: forward Z = H W (2 in out), weight
// gradient dW = H^T dZ (2 in out), input gradient dH = dZ W^T (2 in out) for every layer but the
// first, whose input needs no gradient. 784-512-512-10: 3,209,216.
double FlopsPerSample(const std::vector<int>& widths) {
  double flops = 0;
  for (size_t l = 0; l + 1 < widths.size(); ++l) {
    flops += (l == 0 ? 4.0 : 6.0) * widths[l] * widths[l + 1];
  }
  return flops;
}

Split RandomSplit(int64_t rows, Philox& rng) {
  Split split;
  split.x.resize(rows, kFeatures);
  for (int64_t i = 0; i < rows; ++i) {
    for (int j = 0; j < kFeatures; ++j) split.x(i, j) = static_cast<float>(rng.NextNormal());
    split.labels.push_back(static_cast<int32_t>(rng.NextBelow(kClasses)));
  }
  return split;
}

PreparedData SyntheticData() {
  PreparedData data;
  for (int k = 0; k < kClasses; ++k) data.class_names.push_back("c" + std::to_string(k));
  Philox rng(Derive(1, "bench-data"));
  data.train = RandomSplit(kTrainRows, rng);
  data.validation = RandomSplit(kHeldOutRows, rng);
  data.test = RandomSplit(kHeldOutRows, rng);
  return data;
}

// The convolutional member: FLOPs per sample of its convolutions (as dense layers over the
// unfolded pixels: forward and kernel gradient for both stages, input gradient for the second)
// and of its dense layers.
ModelConfig ConvModel() {
  ModelConfig m;
  m.image = {1, 28, 28};
  m.conv = {{16, 3, Pooling::kMax}, {32, 3, Pooling::kMax}};
  m.hidden = {128};
  return m;
}

double ConvFlopsPerSample() {
  const double stage1 = 2.0 * 28 * 28 * 9 * 16, stage2 = 2.0 * 14 * 14 * 144 * 32;
  return 2 * stage1 + 3 * stage2 + 6.0 * 1568 * 128 + 6.0 * 128 * kClasses;
}

MemberSpec BenchSpec(int index, int batch, int timed_epochs, bool conv, ProductPrecision products) {
  MemberSpec spec;
  spec.index = index;
  spec.seed = Derive(7, static_cast<uint64_t>(index));
  if (conv) spec.model = ConvModel();
  else spec.model.hidden = {512, 512};
  spec.model.activation = Activation::kRelu;
  spec.train.epochs = kWarmupEpochs + timed_epochs;
  spec.train.batch_size = batch;
  spec.train.products = products;
  return spec;
}

// Trains `members` members at once, one per thread; with members < threads, the one member
// (members must then be 1) is granted the other threads, as execution/job_slots.h grants them.
// Returns samples per second over the union of their timed windows. Exits with a message if a
// member fails.
double MeasureSamplesPerSecond(int threads, int members, int batch, int timed_epochs, bool conv,
                               ProductPrecision products, const PreparedData& data) {
  std::vector<Clock::time_point> first(members), last(members);
  tbb::task_arena arena(members);
  const TeamParallelFor parallel(threads);  // the helpers of a member that has the spare threads
  arena.execute([&] {
    tbb::parallel_for(0, members, [&](int m) {
      const ProgressFn mark = [&, m](const EpochProgress& p) {
        if (p.epoch == kWarmupEpochs) first[m] = Clock::now();
        if (p.epoch == p.epochs) last[m] = Clock::now();
      };
      const StatusOr<MemberResult> result =
          TrainMember(BenchSpec(m, batch, timed_epochs, conv, products), data, mark, nullptr,
                      members < threads ? &parallel : nullptr);
      if (!result.ok()) {
        std::fprintf(stderr, "member %d failed: %s\n", m, result.status().ToString().c_str());
        std::exit(1);
      }
    });
  });
  const auto start = *std::min_element(first.begin(), first.end());
  const auto end = *std::max_element(last.begin(), last.end());
  const double seconds = std::chrono::duration<double>(end - start).count();
  return static_cast<double>(members) * timed_epochs * kTrainRows / seconds;
}

std::string CpuModel() {
  std::ifstream cpuinfo("/proc/cpuinfo");
  for (std::string line; std::getline(cpuinfo, line);) {
    if (line.rfind("model name", 0) == 0) return line.substr(line.find(':') + 2);
  }
  return "unknown";
}

int AvailableCpus() {
  cpu_set_t set;
  return sched_getaffinity(0, sizeof(set), &set) == 0 ? CPU_COUNT(&set) : -1;
}

void PrintMachine(ProductPrecision products) {
  const char* coretype = std::getenv("OPENBLAS_CORETYPE");
  std::printf("machine: cpu=\"%s\" nproc=%d OPENBLAS_CORETYPE=%s gemm=%s\n", CpuModel().c_str(),
              AvailableCpus(), coretype ? coretype : "unset", GemmBackendName(products));
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) {
  using namespace chorus;
  const int batch = argc > 1 ? std::atoi(argv[1]) : 128;
  const int timed_epochs = argc > 2 ? std::atoi(argv[2]) : 5;
  const std::string network = argc > 3 ? argv[3] : "mlp";
  const auto products = ParseProductPrecision(argc > 4 ? argv[4] : "fp32");
  if (argc > 5 || batch < 1 || timed_epochs < 1 || (network != "mlp" && network != "conv") ||
      !products) {
    std::fprintf(stderr,
                 "usage: chorus-bench-train [BATCH [TIMED_EPOCHS [mlp|conv [fp32|bf16]]]]   (both >= 1)\n");
    return 2;
  }
  if (*products == ProductPrecision::kBf16 && !Bf16ProductsAvailable()) {
    std::fprintf(stderr, "chorus-bench-train: this CPU has no AVX512_BF16; bf16 would run as fp32\n");
    return 2;
  }
  const bool conv = network == "conv";
  PrintMachine(*products);
  const PreparedData data = SyntheticData();
  const double flops = conv ? ConvFlopsPerSample() : FlopsPerSample({kFeatures, 512, 512, kClasses});
  const struct {
    const char* kind;
    int threads, members;
  } configurations[] = {{"chorus", 1, 1}, {"chorus", 2, 2}, {"granted", 2, 1}};
  for (const auto& c : configurations) {
    const double rate = MeasureSamplesPerSecond(c.threads, c.members, batch, timed_epochs, conv,
                                                *products, data);
    std::printf("%s threads=%d members=%d batch=%d samples_per_s=%.0f gflops=%.2f", c.kind,
                c.threads, c.members, batch, rate, rate * flops * 1e-9);
    std::printf(" flops_per_sample=%.0f%s%s\n", flops, conv ? " network=conv" : "",
                *products == ProductPrecision::kBf16 ? " products=bf16" : "");
    std::fflush(stdout);
  }
  return 0;
}

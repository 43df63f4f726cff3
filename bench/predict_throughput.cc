// chorus-bench-predict: throughput and peak memory of `chorus predict` on this machine.
//
// Bundle: 8 members of 784-512-512-10 (relu, 669,706 parameters), each a gaussian_lowrank basin
// fit of rank 10 with 10 samples (80 networks in all), random weights (N(0, 2/fan_in)), written
// with the real codec. Input: 10,000 random 28x28 ubyte images in an IDX file (the Fashion-MNIST
// test set's shape). The real `chorus predict` executable runs as a child process, so the times
// include everything a user waits for: reading and verifying the bundle, re-drawing the 80
// samples, streaming the input, 80 forward passes per row, mixing and writing the CSV. Peak
// memory is the child's maximum resident set (wait4's ru_maxrss).
// A run on a 1-row input gives the fixed cost (load + draw); the *_steady rates exclude it.
// Wall-clock rates need an otherwise idle machine; rows_per_cpu_s_steady (rows per CPU-second of
// the child, all threads) is less sensitive to other load, and loadavg says how busy it was.
// Usage: chorus-bench-predict [CHORUS_BINARY] (default: the build's chorus)
// Output: one line per thread count:
//   chorus-predict threads=T rows=N seconds=S load_seconds=L rows_per_s=R rows_per_s_steady=R2
//                  gflops=G cpu_seconds=C rows_per_cpu_s_steady=R3 peak_rss_mib=M bundle_mib=B
//                  loadavg=A
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/rng.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

constexpr int kSide = 28;
constexpr int kFeatures = kSide * kSide;
constexpr int kMembers = 8;
constexpr int kSamples = 10;
constexpr int kRank = 10;
constexpr int64_t kRows = 10000;

std::vector<float> Normal(Philox& rng, int64_t n, double sd) {
  std::vector<float> v(static_cast<size_t>(n));
  for (float& x : v) x = static_cast<float>(sd * rng.NextNormal());
  return v;
}

// He-scaled weights for each layer, zero biases: the Mlp layout (common/mlp.h).
std::vector<float> Weights(const std::vector<int>& widths, Philox& rng) {
  std::vector<float> w;
  for (size_t l = 0; l + 1 < widths.size(); ++l) {
    const std::vector<float> layer =
        Normal(rng, int64_t{widths[l]} * widths[l + 1], std::sqrt(2.0 / widths[l]));
    w.insert(w.end(), layer.begin(), layer.end());
    w.insert(w.end(), static_cast<size_t>(widths[l + 1]), 0.0f);
  }
  return w;
}

BundleMember Member(int index, const std::vector<int>& widths, Philox& rng) {
  BundleMember m;
  m.index = index;
  m.seed = Derive(7, static_cast<uint64_t>(index));
  m.weight = 1.0 / kMembers;
  m.basin.method = BasinMethod::kGaussianLowRank;
  m.basin.mean = Weights(widths, rng);
  const int64_t p = static_cast<int64_t>(m.basin.mean.size());
  m.basin.variance.assign(static_cast<size_t>(p), 1e-6f);
  m.basin.deviations.resize(kRank, p);
  for (int64_t i = 0; i < m.basin.deviations.size(); ++i) {
    m.basin.deviations.data()[i] = static_cast<float>(1e-3 * rng.NextNormal());
  }
  for (int s = 0; s < kSamples; ++s) m.sample_seeds.push_back(Derive(m.seed, s));
  return m;
}

Bundle BenchBundle() {
  Bundle b;
  b.preprocessing.format = "idx";
  for (int j = 0; j < kFeatures; ++j) {
    b.preprocessing.plan.columns.push_back({"x" + std::to_string(j), false, j});
  }
  b.preprocessing.standardizer = {std::vector<float>(kFeatures, 72.9f),
                                  std::vector<float>(kFeatures, 90.0f)};
  b.widths = {kFeatures, 512, 512, 10};
  for (int k = 0; k < 10; ++k) b.class_names.push_back(std::to_string(k));
  Philox rng(3);
  for (int m = 0; m < kMembers; ++m) b.members.push_back(Member(m, b.widths, rng));
  b.temperature = 1.2;
  b.run_name = "bench";
  b.chorus_version = CHORUS_VERSION;
  return b;
}

void WriteImages(const std::string& path, int64_t rows) {
  std::string bytes = {0, 0, 0x08, 3};
  for (uint32_t d : {static_cast<uint32_t>(rows), uint32_t{kSide}, uint32_t{kSide}}) {
    for (int shift = 24; shift >= 0; shift -= 8) bytes += static_cast<char>((d >> shift) & 0xFF);
  }
  Philox rng(5);
  for (int64_t i = 0; i < rows * kFeatures; ++i) bytes += static_cast<char>(rng.NextBelow(256));
  std::ofstream(path, std::ios::binary) << bytes;
}

struct Measured {
  double seconds = 0;      // wall clock
  double cpu_seconds = 0;  // user + system time of the child, all threads
  double peak_rss_mib = 0;
};

double Seconds(const timeval& t) { return static_cast<double>(t.tv_sec) + t.tv_usec / 1e6; }

// The 1-minute load average: other work on the machine skews wall-clock rates.
double LoadAverage() {
  double load = 0;
  std::ifstream("/proc/loadavg") >> load;
  return load;
}

// Runs `chorus predict` as a child; exits the benchmark if it fails.
Measured RunPredict(const std::string& chorus, const std::string& bundle, const std::string& input,
                    const std::string& output, int threads) {
  const std::string t = std::to_string(threads);
  const auto start = std::chrono::steady_clock::now();
  const pid_t pid = fork();
  if (pid == 0) {
    execl(chorus.c_str(), chorus.c_str(), "predict", bundle.c_str(), input.c_str(), "-o",
          output.c_str(), "--threads", t.c_str(), static_cast<char*>(nullptr));
    _exit(127);
  }
  int status = 0;
  rusage usage{};
  wait4(pid, &status, 0, &usage);
  if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    std::fprintf(stderr, "chorus predict failed (status %d)\n", status);
    std::exit(1);
  }
  const double seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return {seconds, Seconds(usage.ru_utime) + Seconds(usage.ru_stime),
          static_cast<double>(usage.ru_maxrss) / 1024.0};
}

int Main(int argc, char** argv) {
  const std::string chorus = argc > 1 ? argv[1] : std::string(CHORUS_BINARY_DIR) + "/chorus";
  const std::string dir = std::filesystem::temp_directory_path() / "chorus-bench-predict";
  std::filesystem::create_directories(dir);
  const Bundle bundle = BenchBundle();
  const Status written = WriteBundleFile(dir + "/bundle.chorus", bundle);
  if (!written.ok()) {
    std::fprintf(stderr, "%s\n", written.ToString().c_str());
    return 1;
  }
  WriteImages(dir + "/one.idx", 1);
  WriteImages(dir + "/rows.idx", kRows);
  const double bundle_mib = std::filesystem::file_size(dir + "/bundle.chorus") / 1048576.0;
  const double flops_per_row = 2.0 * BundleParameterCount(bundle.widths) * kMembers * kSamples;
  for (int threads : {1, 2}) {
    const double load_average = LoadAverage();
    const Measured load =
        RunPredict(chorus, dir + "/bundle.chorus", dir + "/one.idx", dir + "/one.csv", threads);
    const Measured all =
        RunPredict(chorus, dir + "/bundle.chorus", dir + "/rows.idx", dir + "/rows.csv", threads);
    const double steady = kRows / (all.seconds - load.seconds);
    std::printf(
        "chorus-predict threads=%d rows=%lld seconds=%.2f load_seconds=%.2f rows_per_s=%.1f "
        "rows_per_s_steady=%.1f gflops=%.1f cpu_seconds=%.1f rows_per_cpu_s_steady=%.1f "
        "peak_rss_mib=%.0f bundle_mib=%.0f loadavg=%.2f\n",
        threads, static_cast<long long>(kRows), all.seconds, load.seconds, kRows / all.seconds,
        steady, steady * flops_per_row / 1e9, all.cpu_seconds,
        kRows / (all.cpu_seconds - load.cpu_seconds), all.peak_rss_mib, bundle_mib, load_average);
    std::fflush(stdout);
  }
  std::filesystem::remove_all(dir);
  return 0;
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) { return chorus::Main(argc, argv); }

// chorus-bench-predict: throughput and peak memory of `chorus predict` on this machine, against
// the matrix-product limit of the same core.
//
// Bundle: 8 members of 784-512-512-10 (relu, 669,706 parameters), each a gaussian_lowrank basin
// fit of rank 10 with 10 samples (80 networks in all), random weights (N(0, 2/fan_in)), written
// with the real codec. Input: 10,000 random 28x28 ubyte images in an IDX file (the Fashion-MNIST
// test set's shape). The real `chorus predict` executable runs as a child process, so the times
// include everything a user waits for: reading and verifying the bundle, re-drawing the 80
// samples, streaming the input, 80 forward passes per row, mixing and writing the CSV. Peak
// memory is the child's maximum resident set (wait4's ru_maxrss).
// The child logs how long loading took (reading and checking the bundle, drawing the samples: a
// fixed cost) and how long predicting took (everything after); the *_steady rates, the per-core
// figure and pct_of_gemm use the latter. Each thread count runs `repeat` times and the fastest
// prediction is kept: other work on the machine only ever slows a run down, and loadavg (as that
// run started) says how busy the machine was.
//
// The limit: in this process, one thread, the products a forward pass of a 1024-row batch makes
// (1024x784 * 784x512, 1024x512 * 512x512, 1024x512 * 512x10) through common/gemm.h, for 8
// networks of their own weights in turn, timed alone (gemm_gflops) and as whole Mlp::Forward
// passes (forward_rows_per_s: bias, activations and products); measured before every predict
// run, best kept. ceiling = gemm_gflops / GEMM flops per network row (1,337,344 here), or
// forward_rows_per_s if that is higher (the products cannot be slower than a pass containing
// them; timed alone they read colder memory). pct_of_gemm = member-sample-rows per second per
// core over that ceiling.
//
// Usage: chorus-bench-predict [CHORUS_BINARY] [--threads 1,2] [--repeat 3] [--rows 10000]
//                             [--keep DIR]
//   CHORUS_BINARY defaults to the build's chorus; --keep writes the bundle and inputs into DIR and
//   leaves them there (for profiling `chorus predict` on them).
// Output: one kernel line, then one line per thread count:
//   chorus-predict-limit gemm=NAME openblas_coretype=C gemm_gflops=G forward_rows_per_s=F
//                        ceiling_member_sample_rows_per_s=X loadavg=A
//   chorus-predict threads=T rows=N seconds=S load_seconds=L predict_seconds=P rows_per_s=R
//                  rows_per_s_steady=R2 member_sample_rows_per_s_per_core=M pct_of_gemm=P
//                  gflops=G cpu_seconds=C peak_rss_mib=M bundle_mib=B loadavg=A
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/gemm.h"
#include "common/mlp.h"
#include "common/rng.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

constexpr int kSide = 28;
constexpr int kFeatures = kSide * kSide;
constexpr int kMembers = 8;
constexpr int kSamples = 10;
constexpr int kRank = 10;
constexpr int64_t kBatch = 1024;  // rows per forward pass, as chorus predict runs them

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
  double seconds = 0;          // wall clock of the whole child
  double cpu_seconds = 0;      // user + system time of the child, all threads
  double peak_rss_mib = 0;
  double load_seconds = 0;     // as the child logs them: reading the bundle, drawing samples
  double predict_seconds = 0;  // and everything after: input, forward passes, mixing, CSV
  double loadavg = 0;          // the 1-minute load average as the run started
};

double Seconds(const timeval& t) { return static_cast<double>(t.tv_sec) + t.tv_usec / 1e6; }

// The 1-minute load average: other work on the machine skews wall-clock rates.
double LoadAverage() {
  double load = 0;
  std::ifstream("/proc/loadavg") >> load;
  return load;
}

// The number after "KEY": in a JSON log line of `text`, or -1.
double JsonNumber(const std::string& text, const std::string& key) {
  const size_t at = text.find("\"" + key + "\":");
  return at == std::string::npos ? -1 : std::atof(text.c_str() + at + key.size() + 3);
}

// Runs `chorus predict` as a child (JSON log lines into `log`); exits the benchmark if it fails.
Measured RunPredict(const std::string& chorus, const std::string& bundle, const std::string& input,
                    const std::string& output, const std::string& log, int threads) {
  const std::string t = std::to_string(threads);
  const double loadavg = LoadAverage();
  const auto start = std::chrono::steady_clock::now();
  const pid_t pid = fork();
  if (pid == 0) {
    if (!std::freopen(log.c_str(), "w", stderr)) _exit(126);
    execl(chorus.c_str(), chorus.c_str(), "predict", bundle.c_str(), input.c_str(), "-o",
          output.c_str(), "--threads", t.c_str(), "--log-format", "json",
          static_cast<char*>(nullptr));
    _exit(127);
  }
  int status = 0;
  rusage usage{};
  wait4(pid, &status, 0, &usage);
  std::ifstream in(log);
  const std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    std::fprintf(stderr, "chorus predict failed (status %d):\n%s\n", status, text.c_str());
    std::exit(1);
  }
  Measured m;
  m.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  m.cpu_seconds = Seconds(usage.ru_utime) + Seconds(usage.ru_stime);
  m.peak_rss_mib = static_cast<double>(usage.ru_maxrss) / 1024.0;
  m.load_seconds = JsonNumber(text, "load_seconds");
  m.predict_seconds = JsonNumber(text, "predict_seconds");
  m.loadavg = loadavg;
  if (m.predict_seconds <= 0) {
    std::fprintf(stderr, "chorus predict logged no predict_seconds:\n%s\n", text.c_str());
    std::exit(1);
  }
  return m;
}

// The run with the shortest prediction time of `repeat` runs; calls `before_each` before each.
template <typename Fn>
Measured BestOf(int repeat, const std::string& chorus, const std::string& dir, int threads,
                const Fn& before_each) {
  Measured best;
  for (int r = 0; r < repeat; ++r) {
    before_each();
    const Measured m = RunPredict(chorus, dir + "/bundle.chorus", dir + "/rows.idx",
                                  dir + "/rows.csv", dir + "/predict.log", threads);
    if (r == 0 || m.predict_seconds < best.predict_seconds) best = m;
  }
  return best;
}

// Seconds of the fastest of 7 calls of `fn` (after one warm-up call).
template <typename Fn>
double FastestSeconds(const Fn& fn) {
  fn();
  double best = 1e30;
  for (int r = 0; r < 7; ++r) {
    const auto start = std::chrono::steady_clock::now();
    fn();
    best = std::min(best, std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  return best;
}

struct Limit {
  double gemm_flops_per_row = 0;  // 2 m k n of the products, per network row
  double gemm_gflops = 0;         // the products alone, 1 thread
  double forward_rows_per_s = 0;  // whole Mlp::Forward passes, network rows per second, 1 thread
};

// The forward pass's matrix products on one 1024-row batch through kNets networks of their own
// weights (as predict cycles through its samples), on activations a real forward pass makes;
// timed alone, and inside Mlp::Forward.
Limit MeasureLimit(const std::vector<int>& widths, Philox& rng) {
  constexpr int kNets = 8;
  const Mlp net(widths, Activation::kRelu);
  const int layers = net.layers();
  Matrix x(kBatch, widths[0]);
  for (int64_t i = 0; i < x.size(); ++i) x.data()[i] = static_cast<float>(rng.NextNormal());
  std::vector<std::vector<float>> params(kNets, std::vector<float>(static_cast<size_t>(net.ParameterCount())));
  for (int n = 0; n < kNets; ++n) net.Initialize(Derive(17, static_cast<uint64_t>(n)), params[n].data());
  // The inputs of the products: the activations of network 0, shared, so that they are as warm in
  // cache as a forward pass's own activations are when the next layer reads them.
  Mlp::Workspace acts = net.MakeWorkspace(kBatch);
  net.Forward(params[0].data(), x, acts);
  Limit limit;
  for (int l = 0; l < layers; ++l) limit.gemm_flops_per_row += 2.0 * widths[l] * widths[l + 1];
  std::vector<Matrix> out;
  for (int l = 0; l < layers; ++l) out.emplace_back(kBatch, widths[l + 1]);
  const double gemm_seconds = FastestSeconds([&] {
    for (int n = 0; n < kNets; ++n) {
      for (int l = 0; l < layers; ++l) {
        Eigen::Map<const Matrix> w(params[n].data() + net.WeightOffset(l), widths[l], widths[l + 1]);
        const ConstMatrixRef in = l == 0 ? ConstMatrixRef(x) : ConstMatrixRef(acts.post[l - 1]);
        Gemm(Transpose::kNo, Transpose::kNo, 1.0f, in, w, 1.0f, out[l]);
      }
    }
  });
  Mlp::Workspace ws = net.MakeWorkspace(kBatch);
  const double forward_seconds = FastestSeconds([&] {
    for (int n = 0; n < kNets; ++n) net.Forward(params[n].data(), x, ws);
  });
  limit.gemm_gflops = limit.gemm_flops_per_row * kBatch * kNets / gemm_seconds * 1e-9;
  limit.forward_rows_per_s = kBatch * kNets / forward_seconds;
  return limit;
}

struct Options {
  std::string chorus = std::string(CHORUS_BINARY_DIR) + "/chorus";
  std::vector<int> threads = {1, 2};
  int repeat = 3;
  int64_t rows = 10000;
  std::string keep;  // directory to leave the files in; "" = a temporary one, removed
};

// Parses the command line; exits with a usage message on anything else.
Options ParseOptions(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    const bool has_value = i + 1 < argc;
    if (a == "--threads" && has_value) {
      o.threads.clear();
      std::string list = argv[++i];
      for (size_t p = 0; p < list.size();) {
        const size_t comma = list.find(',', p);
        o.threads.push_back(std::atoi(list.substr(p, comma - p).c_str()));
        p = comma == std::string::npos ? list.size() : comma + 1;
      }
    } else if (a == "--repeat" && has_value) {
      o.repeat = std::max(1, std::atoi(argv[++i]));
    } else if (a == "--rows" && has_value) {
      o.rows = std::max<int64_t>(1, std::atoll(argv[++i]));
    } else if (a == "--keep" && has_value) {
      o.keep = argv[++i];
    } else if (a.rfind("--", 0) != 0) {
      o.chorus = a;
    } else {
      std::fprintf(stderr, "usage: chorus-bench-predict [CHORUS_BINARY] [--threads 1,2] "
                           "[--repeat 3] [--rows 10000] [--keep DIR]\n");
      std::exit(2);
    }
  }
  return o;
}

int Main(int argc, char** argv) {
  const Options o = ParseOptions(argc, argv);
  const std::string dir = o.keep.empty()
      ? (std::filesystem::temp_directory_path() / "chorus-bench-predict").string() : o.keep;
  std::filesystem::create_directories(dir);
  const Bundle bundle = BenchBundle();
  const Status written = WriteBundleFile(dir + "/bundle.chorus", bundle);
  if (!written.ok()) {
    std::fprintf(stderr, "%s\n", written.ToString().c_str());
    return 1;
  }
  WriteImages(dir + "/rows.idx", o.rows);
  const double bundle_mib = std::filesystem::file_size(dir + "/bundle.chorus") / 1048576.0;
  const int networks = kMembers * kSamples;
  const double flops_per_row = 2.0 * BundleParameterCount(bundle.widths) * networks;
  Philox rng(13);
  const double limit_load = LoadAverage();
  // The limit is measured before every run of chorus predict and its best kept, so that it has
  // as many chances as the runs to meet a quiet machine.
  Limit limit;
  const auto measure_limit = [&] {
    const Limit now = MeasureLimit(bundle.widths, rng);
    limit.gemm_flops_per_row = now.gemm_flops_per_row;
    limit.gemm_gflops = std::max(limit.gemm_gflops, now.gemm_gflops);
    limit.forward_rows_per_s = std::max(limit.forward_rows_per_s, now.forward_rows_per_s);
  };
  std::vector<Measured> runs;
  for (int threads : o.threads) runs.push_back(BestOf(o.repeat, o.chorus, dir, threads, measure_limit));
  // A forward pass does the products and more, so its rate bounds theirs from below: on a busy
  // machine the products' own timing can come out lower, and then the forward rate stands in.
  const double ceiling = std::max(limit.gemm_gflops * 1e9 / limit.gemm_flops_per_row,
                                  limit.forward_rows_per_s);
  const char* coretype = std::getenv("OPENBLAS_CORETYPE");
  std::printf("chorus-predict-limit gemm=%s openblas_coretype=%s gemm_gflops=%.1f "
              "forward_rows_per_s=%.0f ceiling_member_sample_rows_per_s=%.0f loadavg=%.2f\n",
              GemmBackendName(), coretype != nullptr ? coretype : "unset", limit.gemm_gflops,
              limit.forward_rows_per_s, ceiling, limit_load);
  for (size_t i = 0; i < o.threads.size(); ++i) {
    const Measured& m = runs[i];
    const double rows = static_cast<double>(o.rows);
    const double steady = rows / m.predict_seconds;
    const double per_core = steady * networks / o.threads[i];
    std::printf(
        "chorus-predict threads=%d rows=%lld seconds=%.2f load_seconds=%.2f "
        "predict_seconds=%.2f rows_per_s=%.1f rows_per_s_steady=%.1f "
        "member_sample_rows_per_s_per_core=%.0f pct_of_gemm=%.1f gflops=%.1f cpu_seconds=%.1f "
        "peak_rss_mib=%.0f bundle_mib=%.0f loadavg=%.2f\n",
        o.threads[i], static_cast<long long>(o.rows), m.seconds, m.load_seconds,
        m.predict_seconds, rows / m.seconds, steady, per_core, 100.0 * per_core / ceiling,
        steady * flops_per_row / 1e9, m.cpu_seconds, m.peak_rss_mib, bundle_mib, m.loadavg);
  }
  if (o.keep.empty()) std::filesystem::remove_all(dir);
  return 0;
}

}  // namespace
}  // namespace chorus

int main(int argc, char** argv) { return chorus::Main(argc, argv); }

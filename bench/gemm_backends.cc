// chorus-bench-gemm: single-thread fp32 GEMM rate of the candidate backends on the matrix shapes
// of training a 784-512-512-10 MLP at batch 128 (forward X W, backward H^T dZ and dZ W^T).
// Candidates: Eigen's own product (as built, no -march flags) and oneDNN's dnnl_sgemm (runtime
// CPU dispatch). The winner backs chorus::Gemm (common/gemm.cc).
#include <oneapi/dnnl/dnnl.h>
#include <omp.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>

#include "common/matrix.h"

namespace {

struct Shape {
  const char* what;
  bool ta, tb;
  int m, n, k;
};

// GFLOP/s of f (2 m n k flops per call) over at least 0.5 s after 3 warm-up calls.
template <typename F>
double Rate(F f, double flops) {
  for (int i = 0; i < 3; ++i) f();
  int calls = 0;
  const auto start = std::chrono::steady_clock::now();
  double seconds = 0;
  do {
    f();
    ++calls;
    seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  } while (seconds < 0.5);
  return flops * calls / seconds / 1e9;
}

}  // namespace

int main() {
  omp_set_num_threads(1);
  const char* coretype = std::getenv("OPENBLAS_CORETYPE");
  std::printf("threads=1 OPENBLAS_CORETYPE=%s\n", coretype ? coretype : "unset");
  const Shape shapes[] = {
      {"forward 1", false, false, 128, 512, 784}, {"forward 2", false, false, 128, 512, 512},
      {"forward 3", false, false, 128, 10, 512},  {"grad W1", true, false, 784, 512, 128},
      {"grad W2", true, false, 512, 512, 128},    {"grad H1", false, true, 128, 512, 512}};
  for (const Shape& s : shapes) {
    chorus::Matrix a = s.ta ? chorus::Matrix::Random(s.k, s.m) : chorus::Matrix::Random(s.m, s.k);
    chorus::Matrix b = s.tb ? chorus::Matrix::Random(s.n, s.k) : chorus::Matrix::Random(s.k, s.n);
    chorus::Matrix c(s.m, s.n);
    const double flops = 2.0 * s.m * s.n * s.k;
    const double eigen = Rate([&] {
      if (s.ta) c.noalias() = a.transpose() * b;
      else if (s.tb) c.noalias() = a * b.transpose();
      else c.noalias() = a * b;
    }, flops);
    const double onednn = Rate([&] {
      dnnl_sgemm(s.ta ? 'T' : 'N', s.tb ? 'T' : 'N', s.m, s.n, s.k, 1.0f, a.data(), a.outerStride(),
                 b.data(), b.outerStride(), 0.0f, c.data(), c.outerStride());
    }, flops);
    std::printf("%-9s m=%-4d n=%-4d k=%-4d eigen %6.1f GFLOP/s  onednn %6.1f GFLOP/s\n", s.what, s.m,
                s.n, s.k, eigen, onednn);
  }
  return 0;
}

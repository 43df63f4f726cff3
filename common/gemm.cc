#include "common/gemm.h"

#include <oneapi/dnnl/dnnl.h>
#include <omp.h>

#include <cassert>
#include <cstdio>
#include <cstdlib>

namespace chorus {
namespace {

// oneDNN's sgemm picks its kernel at run time for the CPU it finds (SSE4.1, AVX2, AVX-512...), so
// one binary runs at full speed on any x86-64 server. Its OpenMP runtime would start a team of
// all cores on every call; chorus parallelises across members instead, so each calling thread
// asks for a team of one. Measured in bench/gemm_backends.cc.
void UseOnlyTheCallingThread() {
  thread_local bool done = false;
  if (!done) {
    omp_set_num_threads(1);
    done = true;
  }
}

}  // namespace

void Gemm(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
          const ConstMatrixRef& b, float beta, MatrixRef c) {
  const bool ta = trans_a == Transpose::kYes, tb = trans_b == Transpose::kYes;
  const int64_t m = c.rows(), n = c.cols(), k = ta ? a.rows() : a.cols();
  assert((ta ? a.cols() : a.rows()) == m && (tb ? b.rows() : b.cols()) == n &&
         (tb ? b.cols() : b.rows()) == k);
  if (m == 0 || n == 0) return;
  if (k == 0) {
    if (beta == 0.0f) c.setZero();
    else c *= beta;
    return;
  }
  UseOnlyTheCallingThread();
  const dnnl_status_t st = dnnl_sgemm(ta ? 'T' : 'N', tb ? 'T' : 'N', m, n, k, alpha, a.data(),
                                      a.outerStride(), b.data(), b.outerStride(), beta, c.data(),
                                      c.outerStride());
  if (st != dnnl_success) {
    std::fprintf(stderr, "chorus: dnnl_sgemm failed with status %d\n", static_cast<int>(st));
    std::abort();
  }
}

const char* GemmBackendName() { return "onednn-sgemm"; }

}  // namespace chorus

// The one interface every matrix product in chorus goes through, so the backend can be chosen by
// measurement without touching model code. Backend: chorus's own blocked GEMM with AVX-512,
// AVX2 and portable micro-kernels chosen at run time (common/gemm_kernel.h); measured against
// oneDNN's sgemm and Eigen's product by bench/gemm_backends.cc. After a thread's first call,
// calls allocate no memory.
// Shapes: op(A) is m x k, op(B) is k x n, C is m x n; all row-major (common/matrix.h).
// Thread safety: reentrant; the function uses only the calling thread. Deterministic for a given
// instruction set: the same inputs give the same bits.
#pragma once

#include "common/matrix.h"
#include "common/parallel_for.h"
#include "common/product_precision.h"
#include "common/sgd.h"

namespace chorus {

enum class Transpose { kNo, kYes };

// ProductPrecision::kBf16 rounds op(A) and op(B) to bfloat16 (to nearest even) and accumulates
// in fp32; C, alpha, beta and the fused SGD step stay fp32. It runs where the CPU has AVX512_BF16
// (Bf16ProductsAvailable) and falls back to fp32 elsewhere.

// C <- alpha * op(A) * op(B) + beta * C, with op(X) = X or X^T. beta == 0 ignores C's contents
// (NaN in C does not propagate). Requires matching shapes (debug-asserted) and C not aliasing A/B.
void Gemm(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
          const ConstMatrixRef& b, float beta, MatrixRef c,
          ProductPrecision precision = ProductPrecision::kFp32);

// G = alpha * op(A) * op(B), applied to `update` as an SGD step tile by tile while each tile of G
// is still in registers: G itself is never written out, except that `scratch` (m x n) holds
// partial sums when k is longer than one packed block. Fuses the weight-gradient product of
// backpropagation with the optimizer step, saving a pass over the gradient.
void GemmSgdUpdate(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
                   const ConstMatrixRef& b, const SgdUpdate& update, MatrixRef scratch,
                   ProductPrecision precision = ProductPrecision::kFp32);

// Gemm and GemmSgdUpdate with C cut into up to ThreadsOf(parallel) blocks of whole rows or whole
// columns (whichever repeats less packing), each block one item of `parallel`: one product on
// several threads. Same bits as Gemm / GemmSgdUpdate whatever the number of blocks: each element
// of C is summed over k in the same blocks and order whichever block holds it.
void GemmAcross(const ParallelFor* parallel, Transpose trans_a, Transpose trans_b, float alpha,
                const ConstMatrixRef& a, const ConstMatrixRef& b, float beta, MatrixRef c,
                ProductPrecision precision = ProductPrecision::kFp32);
void GemmSgdUpdateAcross(const ParallelFor* parallel, Transpose trans_a, Transpose trans_b,
                         float alpha, const ConstMatrixRef& a, const ConstMatrixRef& b,
                         const SgdUpdate& update, MatrixRef scratch,
                         ProductPrecision precision = ProductPrecision::kFp32);

// Name of the micro-kernel this CPU runs at a precision ("avx512", "avx2", "portable",
// "avx512-bf16"), for benchmark and manifest output.
const char* GemmBackendName(ProductPrecision precision = ProductPrecision::kFp32);

// Whether this CPU runs ProductPrecision::kBf16 as bfloat16 (AVX512_BF16), not as fp32.
bool Bf16ProductsAvailable();

}  // namespace chorus

// The one interface every matrix product in chorus goes through, so the backend can be chosen by
// measurement without touching model code. Backend: oneDNN's sgemm (runtime CPU dispatch),
// chosen over Eigen's product by bench/gemm_backends.cc.
// Shapes: op(A) is m x k, op(B) is k x n, C is m x n; all row-major (common/matrix.h).
// Thread safety: reentrant; the function uses only the calling thread. Deterministic for a given
// instruction set: the same inputs give the same bits.
#pragma once

#include "common/matrix.h"

namespace chorus {

enum class Transpose { kNo, kYes };

// C <- alpha * op(A) * op(B) + beta * C, with op(X) = X or X^T. beta == 0 ignores C's contents
// (NaN in C does not propagate). Requires matching shapes (debug-asserted) and C not aliasing A/B.
void Gemm(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
          const ConstMatrixRef& b, float beta, MatrixRef c);

// Name of the backend compiled in, for benchmark and manifest output.
const char* GemmBackendName();

}  // namespace chorus

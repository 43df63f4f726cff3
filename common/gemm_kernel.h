// Micro-kernels behind chorus::Gemm (common/gemm.cc), one per instruction set, and the blocked
// driver that packs operands for them. Internal to common/; tests reach it to check every kernel
// this CPU can run, not only the one Gemm dispatches to.
// A kernel computes one tile of C, at most mr x nr, from packed panels:
//   ap: kc x mr floats, k-major (ap[p * mr + r] = op(A)(row r, k p)), rows past the tile zero;
//   bp: kc rows of nr floats, ldb apart (bp[p * ldb + j] = op(B)(k p, column j)): a packed panel
//       (ldb = nr, columns past the tile zero) or, for a full-width tile, op(B) itself;
//   G = alpha * (ap^T bp) + beta * C (with beta == 0 C is not read), then either
//   C[rows x cols] <- G (sgd null), or the SGD step of common/gemm.h with G as the gradient, w and
//   v pointing at the tile's first element (sgd non-null; C is not written).
// Thread safety: kernels are pure; the driver packs into buffers owned by the calling thread.
#pragma once

#include <cstdint>

#include "common/gemm.h"

namespace chorus {

struct GemmKernel {
  const char* name;
  int mr, nr;  // largest tile: rows x columns
  void (*tile)(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha, float beta,
               float* c, int64_t ldc, int rows, int cols, const SgdUpdate* sgd);
  // dst[q * ld_dst + r] = src[r * ld_src + q] for r < rows, q < cols: the transposing copy that
  // packing needs (op(A) not transposed, op(B) transposed), vectorised for this instruction set.
  void (*transpose)(const float* src, int64_t ld_src, int rows, int64_t cols, float* dst,
                    int64_t ld_dst);
};

// nullptr when this CPU lacks the instructions (AVX-512F; AVX2 with FMA).
const GemmKernel* Avx512Kernel();
const GemmKernel* Avx2Kernel();
// Plain C++ (the compiler's baseline vectorisation): runs on every x86-64 CPU.
const GemmKernel& PortableKernel();

// The fastest kernel this CPU can run; chosen once per process.
const GemmKernel& BestGemmKernel();

// Gemm (common/gemm.h) with a given kernel; with `sgd` non-null, GemmSgdUpdate (beta must be 0,
// c is the scratch).
void GemmWithKernel(const GemmKernel& kernel, Transpose trans_a, Transpose trans_b, float alpha,
                    const ConstMatrixRef& a, const ConstMatrixRef& b, float beta, MatrixRef c,
                    const SgdUpdate* sgd = nullptr);

}  // namespace chorus

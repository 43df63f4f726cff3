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
// A bfloat16 kernel (bf16_pairs) reads the same layout with each float slot holding a pair of
// bfloat16 values of consecutive k, low half first: kc counts pairs, ap[p * mr + r] packs
// op(A)(r, 2p) and op(A)(r, 2p + 1), bp[p * ldb + j] packs op(B)(2p, j) and op(B)(2p + 1, j), and
// a pair past the end of k holds zero. It multiplies pairs with fp32 accumulation; the epilogue
// (alpha, beta, the SGD step) is the fp32 one.
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
  // bfloat16 kernels only (null otherwise), the two conversions packing needs, each float rounded
  // to bfloat16 to nearest even as the CPU's conversion instruction does:
  // pair_rows: one strip from an operand stored k-major (row p at src + p * ld), k rows of it:
  // dst[q * width + j] = pair(src[2q * ld + j], src[(2q + 1) * ld + j]) for q < ceil(k / 2) and
  // j < n (a missing last row pairs with zero), entries n <= j < width zero; width <= 32;
  // pair_adjacent: dst[q] = pair(src[2q], src[2q + 1]) for q < ceil(k / 2), the last one
  // pair(src[k - 1], 0) when k is odd.
  bool bf16_pairs = false;
  void (*pair_rows)(const float* src, int64_t ld, int64_t k, int n, int width, float* dst) = nullptr;
  void (*pair_adjacent)(const float* src, int64_t k, float* dst) = nullptr;
};

// nullptr when this CPU lacks the instructions (AVX-512F; AVX2 with FMA).
const GemmKernel* Avx512Kernel();
const GemmKernel* Avx2Kernel();
// bfloat16 products (AVX512_BF16 dot products, fp32 accumulation); nullptr when this CPU lacks
// AVX512_BF16. Results differ from the fp32 kernels' by the rounding of the operands.
const GemmKernel* Avx512Bf16Kernel();
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

// Blocked GEMM over the micro-kernels of common/gemm_kernel.h (the BLIS loop order: Van Zee &
// van de Geijn, ACM TOMS 2015). op(B) is packed a kc x nc panel at a time (sized for L2), op(A)
// an mc x kc block at a time, into two buffers each thread allocates once, on its first call;
// later calls allocate nothing. k is cut into equal blocks of at most kKc, so the order of the
// additions depends only on the shapes and the kernel, never on the thread.
#include "common/gemm.h"

#include <algorithm>
#include <cassert>
#include <cstdlib>
#include <memory>

#include "common/gemm_kernel.h"

namespace chorus {
namespace {

constexpr int64_t kKc = 256;  // k per packed block
constexpr int64_t kMc = 144;  // rows of op(A) per packed block: a multiple of every kernel's mr
constexpr int64_t kNc = 512;  // columns of op(B) per packed panel: a multiple of every nr
// Products with fewer multiply-adds stay on one thread when GemmAcross could cut them: a block
// (2M multiply-adds, about 20 microseconds on one core) gains little over handing it to another
// thread.
constexpr int64_t kMinSplitMultiplies = int64_t{1} << 21;

struct FreeDeleter {
  void operator()(float* p) const { std::free(p); }
};

constexpr int64_t kPairRows = 32;  // rows a bfloat16 packing converts before transposing: >= mr, nr

// The calling thread's packing buffers, allocated on its first Gemm. `pairs` holds up to
// kPairRows rows of bfloat16 pairs on their way into a packed strip.
struct PackBuffers {
  std::unique_ptr<float, FreeDeleter> a{static_cast<float*>(
      std::aligned_alloc(64, sizeof(float) * kMc * kKc))};
  std::unique_ptr<float, FreeDeleter> b{static_cast<float*>(
      std::aligned_alloc(64, sizeof(float) * kKc * kNc))};
  std::unique_ptr<float, FreeDeleter> pairs{static_cast<float*>(
      std::aligned_alloc(64, sizeof(float) * kPairRows * kKc / 2))};
};

PackBuffers& ThreadPackBuffers() {
  thread_local PackBuffers buffers;
  if (!buffers.a || !buffers.b || !buffers.pairs) std::abort();  // out of memory on a few hundred KiB
  return buffers;
}

// One strip of op(A): rows [row0, row0 + rows) and k [p0, p0 + kc) as kc x kMr floats, k-major,
// rows past `rows` zero. kMr is a compile-time constant so the fixed-size copies vectorise.
template <int kMr>
void PackAStrip(const GemmKernel& kernel, const float* base, int64_t lda, bool trans, int64_t row0,
                int rows, int64_t p0, int64_t kc, float* out) {
  if (trans) {  // op(A)(i, p) = A(p, i): each k step copies `rows` consecutive floats
    for (int64_t p = 0; p < kc; ++p) {
      const float* src = base + (p0 + p) * lda + row0;
      float* dst = out + p * kMr;
      if (rows == kMr) {
        for (int r = 0; r < kMr; ++r) dst[r] = src[r];
      } else {
        for (int r = 0; r < rows; ++r) dst[r] = src[r];
        for (int r = rows; r < kMr; ++r) dst[r] = 0.0f;
      }
    }
    return;
  }
  // op(A)(i, p) = A(i, p): a transpose of the rows x kc block.
  const float* src = base + row0 * lda + p0;
  kernel.transpose(src, lda, rows, kc, out, kMr);
  for (int64_t p = 0; p < kc; ++p) {
    for (int r = rows; r < kMr; ++r) out[p * kMr + r] = 0.0f;
  }
}

// op(A)[i0 : i0 + mc, p0 : p0 + kc] into strips of mr rows: strip s holds kc x mr floats, k-major,
// rows past mc zero.
template <int kMr>
void PackAStrips(const GemmKernel& kernel, const ConstMatrixRef& a, bool trans, int64_t i0,
                 int64_t mc, int64_t p0, int64_t kc, float* out) {
  for (int64_t s = 0; s < mc; s += kMr, out += kc * kMr) {
    const int rows = static_cast<int>(std::min<int64_t>(kMr, mc - s));
    PackAStrip<kMr>(kernel, a.data(), a.outerStride(), trans, i0 + s, rows, p0, kc, out);
  }
}

void PackA(const GemmKernel& kernel, const ConstMatrixRef& a, bool trans, int64_t i0, int64_t mc,
           int64_t p0, int64_t kc, float* out) {
  switch (kernel.mr) {
    case 12: return PackAStrips<12>(kernel, a, trans, i0, mc, p0, kc, out);
    case 6: return PackAStrips<6>(kernel, a, trans, i0, mc, p0, kc, out);
    case 4: return PackAStrips<4>(kernel, a, trans, i0, mc, p0, kc, out);
  }
  std::abort();  // a kernel with a tile height not listed above
}

// op(B)[p0 : p0 + kc, j0 : j0 + nc] into strips of nr columns: strip s holds kc x nr floats,
// k-major, columns past nc zero. Starts at column `from` (a multiple of nr).
void PackB(const GemmKernel& kernel, const ConstMatrixRef& b, bool trans, int64_t p0, int64_t kc,
           int64_t j0, int64_t nc, int64_t from, float* out) {
  const int nr = kernel.nr;
  const int64_t ldb = b.outerStride();
  const float* base = b.data();
  out += (from / nr) * kc * nr;
  if (!trans) {
    // op(B)(p, j) = B(p, j): row by row, each row of the panel read from start to end (the
    // order the hardware prefetcher follows) and dealt out to the strips.
    for (int64_t p = 0; p < kc; ++p) {
      const float* src = base + (p0 + p) * ldb + j0;
      float* dst = out + p * nr;
      for (int64_t s = from; s < nc; s += nr, dst += kc * nr) {
        const int cols = static_cast<int>(std::min<int64_t>(nr, nc - s));
        for (int j = 0; j < cols; ++j) dst[j] = src[s + j];
        for (int j = cols; j < nr; ++j) dst[j] = 0.0f;
      }
    }
    return;
  }
  for (int64_t s = from; s < nc; s += nr, out += kc * nr) {
    // op(B)(p, j) = B(j, p): a transpose of the cols x kc block of B
    const int cols = static_cast<int>(std::min<int64_t>(nr, nc - s));
    kernel.transpose(base + (j0 + s) * ldb + p0, ldb, cols, kc, out, nr);
    for (int64_t p = 0; p < kc; ++p) {
      for (int j = cols; j < nr; ++j) out[p * nr + j] = 0.0f;
    }
  }
}

// ---- bfloat16 pairs (kernel.bf16_pairs; common/gemm_kernel.h): kc counts k, kcw = ceil(kc / 2)
// pairs per row of a strip ----

// `count` rows (or columns) of an operand whose pairs lie next to each other in memory, row r at
// src + r * ld, k [p0, p0 + kc): converted to pairs, then transposed into a strip of width `width`
// (dst[q * width + r]), entries past `count` zero.
void PackAdjacentPairs(const GemmKernel& kernel, const float* src, int64_t ld, int count,
                       int64_t kc, int width, float* pairs, float* dst) {
  const int64_t kcw = (kc + 1) / 2;
  for (int r = 0; r < count; ++r) kernel.pair_adjacent(src + r * ld, kc, pairs + r * kcw);
  kernel.transpose(pairs, kcw, count, kcw, dst, width);
  for (int64_t q = 0; q < kcw; ++q) {
    for (int r = count; r < width; ++r) dst[q * width + r] = 0.0f;
  }
}

// PackA for a bfloat16 kernel: strip s holds kcw x mr pairs.
void PackAPairs(const GemmKernel& kernel, const ConstMatrixRef& a, bool trans, int64_t i0,
                int64_t mc, int64_t p0, int64_t kc, float* pairs, float* out) {
  const int mr = kernel.mr;
  const int64_t lda = a.outerStride(), kcw = (kc + 1) / 2;
  for (int64_t s = 0; s < mc; s += mr, out += kcw * mr) {
    const int rows = static_cast<int>(std::min<int64_t>(mr, mc - s));
    if (!trans) {  // op(A)(i, p) = A(i, p): pairs next to each other along each row
      PackAdjacentPairs(kernel, a.data() + (i0 + s) * lda + p0, lda, rows, kc, mr, pairs, out);
      continue;
    }
    // op(A)(i, p) = A(p, i): a pair spans two rows of A. Strip by strip, so that each strip is
    // written from start to end (its pair rows are 48 bytes, under a cache line).
    kernel.pair_rows(a.data() + p0 * lda + i0 + s, lda, kc, rows, mr, out);
  }
}

// PackB for a bfloat16 kernel (every column packed): strip s holds kcw x nr pairs.
void PackBPairs(const GemmKernel& kernel, const ConstMatrixRef& b, bool trans, int64_t p0,
                int64_t kc, int64_t j0, int64_t nc, float* pairs, float* out) {
  const int nr = kernel.nr;
  const int64_t ldb = b.outerStride(), kcw = (kc + 1) / 2;
  if (trans) {  // op(B)(p, j) = B(j, p): pairs next to each other along each row of B
    for (int64_t s = 0; s < nc; s += nr, out += kcw * nr) {
      const int cols = static_cast<int>(std::min<int64_t>(nr, nc - s));
      PackAdjacentPairs(kernel, b.data() + (j0 + s) * ldb + p0, ldb, cols, kc, nr, pairs, out);
    }
    return;
  }
  // op(B)(p, j) = B(p, j): a pair spans two rows of B; strip by strip.
  for (int64_t s = 0; s < nc; s += nr, out += kcw * nr) {
    const int cols = static_cast<int>(std::min<int64_t>(nr, nc - s));
    kernel.pair_rows(b.data() + p0 * ldb + j0 + s, ldb, kc, cols, nr, out);
  }
}

}  // namespace

void GemmWithKernel(const GemmKernel& kernel, Transpose trans_a, Transpose trans_b, float alpha,
                    const ConstMatrixRef& a, const ConstMatrixRef& b, float beta, MatrixRef c,
                    const SgdUpdate* sgd) {
  const bool ta = trans_a == Transpose::kYes, tb = trans_b == Transpose::kYes;
  const int64_t m = c.rows(), n = c.cols(), k = ta ? a.rows() : a.cols();
  assert((ta ? a.cols() : a.rows()) == m && (tb ? b.rows() : b.cols()) == n &&
         (tb ? b.cols() : b.rows()) == k);
  if (m == 0 || n == 0) return;
  assert(sgd == nullptr || beta == 0.0f);
  if (k == 0) {
    if (beta == 0.0f) c.setZero();
    else c *= beta;
    if (sgd != nullptr) {  // G = 0: the step still decays and moves the weights
      for (int64_t i = 0; i < m; ++i) {
        SgdEntries(*sgd, c.data() + i * c.outerStride(), sgd->w + i * sgd->ld, sgd->v + i * sgd->ld, n);
      }
    }
    return;
  }
  PackBuffers& buffers = ThreadPackBuffers();
  const int mr = kernel.mr, nr = kernel.nr;
  const int64_t ldc = c.outerStride();
  const int64_t k_blocks = (k + kKc - 1) / kKc;
  int64_t kc_full = (k + k_blocks - 1) / k_blocks;  // equal blocks: no short tail block
  const bool pairs = kernel.bf16_pairs;
  if (pairs) kc_full += kc_full % 2;  // no pair of k across two blocks
  for (int64_t j0 = 0; j0 < n; j0 += kNc) {
    const int64_t nc = std::min(kNc, n - j0);
    for (int64_t p0 = 0; p0 < k; p0 += kc_full) {
      const int64_t kc = std::min(kc_full, k - p0);
      const int64_t kcw = pairs ? (kc + 1) / 2 : kc;  // packed rows per strip
      const float beta_here = p0 == 0 ? beta : 1.0f;
      const bool last_k = p0 + kc >= k;
      const bool update = sgd != nullptr && last_k;  // this k block's tiles apply the SGD step
      // A non-transposed op(B) that only one block of op(A) rows uses (m <= kMc) is read in place,
      // ldb apart, except a last partial strip: packing it would be a copy without reuse. Used by
      // several blocks, it is packed, so that it streams in order once and is then read from L2
      // (the weight-gradient products at every batch, the forward at batch 512: 4-10% less time
      // for the eight products of a step run back to back, chorus-bench-gemm's gemm-sequence).
      // bfloat16 packing converts, so every column is packed.
      const int64_t packed_from = tb || m > kMc || pairs ? 0 : nc - nc % nr;
      if (pairs) PackBPairs(kernel, b, tb, p0, kc, j0, nc, buffers.pairs.get(), buffers.b.get());
      else if (packed_from < nc) PackB(kernel, b, tb, p0, kc, j0, nc, packed_from, buffers.b.get());
      for (int64_t i0 = 0; i0 < m; i0 += kMc) {
        const int64_t mc = std::min(kMc, m - i0);
        if (pairs) PackAPairs(kernel, a, ta, i0, mc, p0, kc, buffers.pairs.get(), buffers.a.get());
        else PackA(kernel, a, ta, i0, mc, p0, kc, buffers.a.get());
        const auto tile = [&](int64_t ir, int64_t jr) {
          const int rows = static_cast<int>(std::min<int64_t>(mr, mc - ir));
          const int cols = static_cast<int>(std::min<int64_t>(nr, nc - jr));
          const bool in_place = jr < packed_from;
          const float* bp = in_place ? b.data() + p0 * b.outerStride() + j0 + jr
                                     : buffers.b.get() + (jr / nr) * kcw * nr;
          const int64_t ldb = in_place ? b.outerStride() : nr;
          SgdUpdate tile_sgd;
          if (update) {
            tile_sgd = *sgd;
            tile_sgd.w += (i0 + ir) * sgd->ld + j0 + jr;
            tile_sgd.v += (i0 + ir) * sgd->ld + j0 + jr;
          }
          kernel.tile(kcw, buffers.a.get() + (ir / mr) * kcw * mr, bp, ldb, alpha, beta_here,
                      c.data() + (i0 + ir) * ldc + j0 + jr, ldc, rows, cols,
                      update ? &tile_sgd : nullptr);
        };
        if (update) {
          // Tiles along each strip of rows, so that the weights and momentum they update stream
          // in row order (the kernel prefetches the next tile's): a fused training step at batch
          // 128 took 4-6% less time than going down the columns (one process, alternating).
          for (int64_t ir = 0; ir < mc; ir += mr) {
            for (int64_t jr = 0; jr < nc; jr += nr) tile(ir, jr);
          }
        } else {
          // Down each column strip: the strip of op(B) stays in L1 across the strips of op(A).
          for (int64_t jr = 0; jr < nc; jr += nr) {
            for (int64_t ir = 0; ir < mc; ir += mr) tile(ir, jr);
          }
        }
      }
    }
  }
}

namespace {

const GemmKernel& KernelFor(ProductPrecision precision) {
  static const GemmKernel* const bf16 = Avx512Bf16Kernel();
  return precision == ProductPrecision::kBf16 && bf16 != nullptr ? *bf16 : BestGemmKernel();
}

// One product cut into `pieces` blocks of C's rows (by_rows) or columns, each a whole number of
// the kernel's tiles but the last; block i is one ParallelFor item.
struct SplitProduct {
  const GemmKernel* kernel;
  Transpose trans_a, trans_b;
  float alpha;
  const ConstMatrixRef* a;
  const ConstMatrixRef* b;
  float beta;
  MatrixRef* c;
  const SgdUpdate* sgd;
  bool by_rows;
  int64_t pieces, unit, extent;  // extent: rows or columns of C; unit: the kernel's mr or nr

  int64_t Boundary(int64_t i) const {
    const int64_t units = (extent + unit - 1) / unit;
    return std::min(extent, i * units / pieces * unit);
  }

  static void RunPiece(void* context, int64_t i) {
    const SplitProduct& s = *static_cast<const SplitProduct*>(context);
    const int64_t lo = s.Boundary(i), len = s.Boundary(i + 1) - lo;
    if (len == 0) return;
    SgdUpdate piece_sgd{};
    if (s.sgd != nullptr) {  // the block's weights and momentum, laid out like C
      piece_sgd = *s.sgd;
      const int64_t offset = s.by_rows ? lo * s.sgd->ld : lo;
      piece_sgd.w += offset;
      piece_sgd.v += offset;
    }
    const SgdUpdate* sgd = s.sgd != nullptr ? &piece_sgd : nullptr;
    if (s.by_rows) {  // rows of op(A)
      const ConstMatrixRef a = s.trans_a == Transpose::kYes ? ConstMatrixRef(s.a->middleCols(lo, len))
                                                            : ConstMatrixRef(s.a->middleRows(lo, len));
      GemmWithKernel(*s.kernel, s.trans_a, s.trans_b, s.alpha, a, *s.b, s.beta,
                     s.c->middleRows(lo, len), sgd);
    } else {  // columns of op(B)
      const ConstMatrixRef b = s.trans_b == Transpose::kYes ? ConstMatrixRef(s.b->middleRows(lo, len))
                                                            : ConstMatrixRef(s.b->middleCols(lo, len));
      GemmWithKernel(*s.kernel, s.trans_a, s.trans_b, s.alpha, *s.a, b, s.beta,
                     s.c->middleCols(lo, len), sgd);
    }
  }
};

void GemmWithKernelAcross(const ParallelFor* parallel, const GemmKernel& kernel, Transpose trans_a,
                          Transpose trans_b, float alpha, const ConstMatrixRef& a,
                          const ConstMatrixRef& b, float beta, MatrixRef c, const SgdUpdate* sgd) {
  const int64_t m = c.rows(), n = c.cols(), k = trans_a == Transpose::kYes ? a.rows() : a.cols();
  const int64_t threads = m * n * k < kMinSplitMultiplies ? 1 : ThreadsOf(parallel);
  // Every block packs the whole of the operand that is not cut. Cutting rows repeats op(B)'s
  // packing (none when each block reads a plain op(B) in place: see GemmWithKernel), cutting
  // columns repeats op(A)'s.
  const bool b_in_place = trans_b == Transpose::kNo && !kernel.bf16_pairs &&
                          (m + threads - 1) / threads <= kMc;
  const bool by_rows = (b_in_place ? 0 : k * n) <= m * k;
  const int64_t unit = by_rows ? kernel.mr : kernel.nr, extent = by_rows ? m : n;
  const int64_t pieces = std::min(threads, (extent + unit - 1) / unit);
  if (pieces <= 1) {  // one thread, a small product, or too few tiles to cut
    GemmWithKernel(kernel, trans_a, trans_b, alpha, a, b, beta, c, sgd);
    return;
  }
  SplitProduct split{&kernel, trans_a, trans_b, alpha, &a, &b, beta, &c, sgd, by_rows, pieces, unit, extent};
  parallel->Run(pieces, &SplitProduct::RunPiece, &split);
}

}  // namespace

void GemmAcross(const ParallelFor* parallel, Transpose trans_a, Transpose trans_b, float alpha,
                const ConstMatrixRef& a, const ConstMatrixRef& b, float beta, MatrixRef c,
                ProductPrecision precision) {
  GemmWithKernelAcross(parallel, KernelFor(precision), trans_a, trans_b, alpha, a, b, beta, c, nullptr);
}

void GemmSgdUpdateAcross(const ParallelFor* parallel, Transpose trans_a, Transpose trans_b,
                         float alpha, const ConstMatrixRef& a, const ConstMatrixRef& b,
                         const SgdUpdate& update, MatrixRef scratch, ProductPrecision precision) {
  GemmWithKernelAcross(parallel, KernelFor(precision), trans_a, trans_b, alpha, a, b, 0.0f, scratch,
                       &update);
}

void Gemm(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
          const ConstMatrixRef& b, float beta, MatrixRef c, ProductPrecision precision) {
  GemmWithKernel(KernelFor(precision), trans_a, trans_b, alpha, a, b, beta, c);
}

void GemmSgdUpdate(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
                   const ConstMatrixRef& b, const SgdUpdate& update, MatrixRef scratch,
                   ProductPrecision precision) {
  GemmWithKernel(KernelFor(precision), trans_a, trans_b, alpha, a, b, 0.0f, scratch, &update);
}

const char* GemmBackendName(ProductPrecision precision) { return KernelFor(precision).name; }

bool Bf16ProductsAvailable() { return Avx512Bf16Kernel() != nullptr; }

}  // namespace chorus

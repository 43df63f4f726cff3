// The micro-kernels of common/gemm_kernel.h. Each instruction set's kernel is compiled with a
// function-level target attribute, so the default build stays baseline x86-64 and the choice is
// made at run time (BestGemmKernel). Register budget, in the style of BLIS (Van Zee & van de
// Geijn, ACM TOMS 2015): AVX-512 keeps a 12 x 32 tile in 24 of its 32 zmm registers, AVX2 a
// 6 x 16 tile in 12 of its 16 ymm registers; each k step loads one row of the B panel and
// broadcasts the tile's A values against it.
#include <immintrin.h>

#include <algorithm>
#include <array>
#include <utility>

#include "common/gemm_kernel.h"

namespace chorus {
namespace {

// ---- AVX-512: tile 12 x 32 ----
constexpr int kMr512 = 12, kNr512 = 32;

__attribute__((target("avx512f"))) inline __mmask16 FirstLanes(int n) {
  return n >= 16 ? __mmask16(0xFFFF) : n <= 0 ? __mmask16(0) : __mmask16((1u << n) - 1u);
}

// The SGD step on up to 16 entries (lanes in m): G in g, weights and momentum at w and v.
// Separate multiplies and adds, as SgdEntries: the same bits.
__attribute__((target("avx512f"))) inline void SgdLanes(const SgdUpdate& u, __m512 g, float* w,
                                                        float* v, __mmask16 m) {
  const __m512 wv = _mm512_maskz_loadu_ps(m, w), vv = _mm512_maskz_loadu_ps(m, v);
  const __m512 mu = _mm512_set1_ps(u.momentum);
  const __m512 d = _mm512_add_ps(g, _mm512_mul_ps(_mm512_set1_ps(u.weight_decay), wv));
  const __m512 nv = _mm512_add_ps(_mm512_mul_ps(mu, vv), d);
  const __m512 step = u.nesterov ? _mm512_add_ps(d, _mm512_mul_ps(mu, nv)) : nv;
  _mm512_mask_storeu_ps(w, m, _mm512_sub_ps(wv, _mm512_mul_ps(_mm512_set1_ps(u.lr), step)));
  _mm512_mask_storeu_ps(v, m, nv);
}

// The weights and momentum of the next tile in these rows (the driver walks update tiles along
// rows), fetched while this tile's k loop runs. A narrow tile ends its rows.
template <int R, bool kWide>
__attribute__((target("avx512f"), always_inline)) inline void PrefetchNextUpdateTile(
    const SgdUpdate* sgd) {
  if (!kWide || sgd == nullptr) return;
  for (int r = 0; r < R; ++r) {
    const float* w = sgd->w + r * sgd->ld + kNr512;
    const float* v = sgd->v + r * sgd->ld + kNr512;
    _mm_prefetch(reinterpret_cast<const char*>(w), _MM_HINT_T0);
    _mm_prefetch(reinterpret_cast<const char*>(v), _MM_HINT_T0);
    _mm_prefetch(reinterpret_cast<const char*>(w + 16), _MM_HINT_T0);
    _mm_prefetch(reinterpret_cast<const char*>(v + 16), _MM_HINT_T0);
  }
}

// The epilogue of an AVX-512 tile: G = alpha acc (+ beta C) stored to C or applied as the SGD step.
template <int R, bool kWide>
__attribute__((target("avx512f"), always_inline)) inline void FinishTileAvx512(
    const __m512 (&acc0)[R], const __m512 (&acc1)[R], float alpha, float beta, float* c,
    int64_t ldc, int cols, const SgdUpdate* sgd) {
  const __mmask16 m0 = FirstLanes(cols), m1 = FirstLanes(cols - 16);
  const __m512 va = _mm512_set1_ps(alpha), vb = _mm512_set1_ps(beta);
#pragma GCC unroll 12
  for (int r = 0; r < R; ++r) {
    float* cr = c + r * ldc;
    __m512 v0 = _mm512_mul_ps(va, acc0[r]);
    if (beta != 0.0f) v0 = _mm512_fmadd_ps(vb, _mm512_maskz_loadu_ps(m0, cr), v0);
    if (sgd == nullptr) _mm512_mask_storeu_ps(cr, m0, v0);
    else SgdLanes(*sgd, v0, sgd->w + r * sgd->ld, sgd->v + r * sgd->ld, m0);
    if constexpr (kWide) {
      __m512 v1 = _mm512_mul_ps(va, acc1[r]);
      if (beta != 0.0f) v1 = _mm512_fmadd_ps(vb, _mm512_maskz_loadu_ps(m1, cr + 16), v1);
      if (sgd == nullptr) _mm512_mask_storeu_ps(cr + 16, m1, v1);
      else SgdLanes(*sgd, v1, sgd->w + r * sgd->ld + 16, sgd->v + r * sgd->ld + 16, m1);
    }
  }
}

// R rows; kWide: both zmm columns of the tile; a tile of at most 16 columns (a narrow output
// layer) runs half the FMAs.
template <int R, bool kWide>
__attribute__((target("avx512f"))) void TileAvx512(int64_t kc, const float* ap, const float* bp,
                                                   int64_t ldb, float alpha, float beta, float* c,
                                                   int64_t ldc, int cols, const SgdUpdate* sgd) {
  PrefetchNextUpdateTile<R, kWide>(sgd);
  __m512 acc0[R], acc1[R];
#pragma GCC unroll 12
  for (int r = 0; r < R; ++r) acc0[r] = acc1[r] = _mm512_setzero_ps();
  for (int64_t p = 0; p < kc; ++p) {
    const __m512 b0 = _mm512_loadu_ps(bp);
    const __m512 b1 = kWide ? _mm512_loadu_ps(bp + 16) : _mm512_setzero_ps();
#pragma GCC unroll 12
    for (int r = 0; r < R; ++r) {
      const __m512 a = _mm512_set1_ps(ap[r]);
      acc0[r] = _mm512_fmadd_ps(a, b0, acc0[r]);
      if constexpr (kWide) acc1[r] = _mm512_fmadd_ps(a, b1, acc1[r]);
    }
    ap += kMr512;
    bp += ldb;
  }
  FinishTileAvx512<R, kWide>(acc0, acc1, alpha, beta, c, ldc, cols, sgd);
}

// ---- AVX512_BF16: the same 12 x 32 tile over bfloat16 pairs (common/gemm_kernel.h) ----
// Each k step is a pair: one vdpbf16ps per accumulator adds two products, twice the work of an
// fp32 FMA in the same instruction.

template <int R, bool kWide>
__attribute__((target("avx512f,avx512bf16"))) void TileAvx512Bf16(
    int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha, float beta, float* c,
    int64_t ldc, int cols, const SgdUpdate* sgd) {
  PrefetchNextUpdateTile<R, kWide>(sgd);
  __m512 acc0[R], acc1[R];
#pragma GCC unroll 12
  for (int r = 0; r < R; ++r) acc0[r] = acc1[r] = _mm512_setzero_ps();
  for (int64_t p = 0; p < kc; ++p) {
    // Loads and broadcasts move bits: the float type only carries the pairs.
    const __m512bh b0 = (__m512bh)_mm512_castps_si512(_mm512_loadu_ps(bp));
    const __m512bh b1 =
        (__m512bh)_mm512_castps_si512(kWide ? _mm512_loadu_ps(bp + 16) : _mm512_setzero_ps());
#pragma GCC unroll 12
    for (int r = 0; r < R; ++r) {
      const __m512bh a = (__m512bh)_mm512_castps_si512(_mm512_set1_ps(ap[r]));
      acc0[r] = _mm512_dpbf16_ps(acc0[r], a, b0);
      if constexpr (kWide) acc1[r] = _mm512_dpbf16_ps(acc1[r], a, b1);
    }
    ap += kMr512;
    bp += ldb;
  }
  FinishTileAvx512<R, kWide>(acc0, acc1, alpha, beta, c, ldc, cols, sgd);
}

// 16 pairs (lo[j], hi[j]): both vectors rounded to nearest even by one vcvtne2ps2bf16, which
// leaves lo's 16 bfloat16 below hi's, then interleaved by one vpermw.
__attribute__((target("avx512f,avx512bw,avx512bf16"), always_inline)) inline __m512i PairLanes(
    __m512 lo, __m512 hi) {
  const __m512i interleave = _mm512_set_epi16(31, 15, 30, 14, 29, 13, 28, 12, 27, 11, 26, 10, 25, 9, 24, 8,
                                              23, 7, 22, 6, 21, 5, 20, 4, 19, 3, 18, 2, 17, 1, 16, 0);
  return _mm512_permutexvar_epi16(interleave, (__m512i)_mm512_cvtne2ps_pbh(hi, lo));
}

// A whole strip per call (12 or 32 entries: one or two vectors per pair row), written from
// start to end.
__attribute__((target("avx512f,avx512bw,avx512bf16"))) void PairRowsAvx512(
    const float* src, int64_t ld, int64_t k, int n, int width, float* dst) {
  const __mmask16 load0 = FirstLanes(n), load1 = FirstLanes(n - 16);
  const __mmask16 store0 = FirstLanes(width), store1 = FirstLanes(width - 16);
  for (int64_t p = 0; p < k; p += 2, dst += width) {
    const float* row0 = src + p * ld;
    const float* row1 = p + 1 < k ? row0 + ld : nullptr;
    const __m512 lo0 = _mm512_maskz_loadu_ps(load0, row0);
    const __m512 hi0 = row1 != nullptr ? _mm512_maskz_loadu_ps(load0, row1) : _mm512_setzero_ps();
    _mm512_mask_storeu_ps(dst, store0, _mm512_castsi512_ps(PairLanes(lo0, hi0)));
    if (width <= 16) continue;
    const __m512 lo1 = _mm512_maskz_loadu_ps(load1, row0 + 16);
    const __m512 hi1 = row1 != nullptr ? _mm512_maskz_loadu_ps(load1, row1 + 16) : _mm512_setzero_ps();
    _mm512_mask_storeu_ps(dst + 16, store1, _mm512_castsi512_ps(PairLanes(lo1, hi1)));
  }
}

__attribute__((target("avx512f,avx512bf16"))) void PairAdjacentAvx512(const float* src, int64_t k,
                                                                      float* dst) {
  // 32 floats in order become 32 bfloat16 in order, that is 16 pairs: no shuffle needed.
  for (int64_t j = 0; j < k; j += 32, dst += 16) {
    const int left = static_cast<int>(std::min<int64_t>(32, k - j));
    const __m512 lo = _mm512_maskz_loadu_ps(FirstLanes(left), src + j);
    const __m512 hi = _mm512_maskz_loadu_ps(FirstLanes(left - 16), src + j + 16);
    const __m512i pairs = (__m512i)_mm512_cvtne2ps_pbh(hi, lo);
    _mm512_mask_storeu_ps(dst, FirstLanes((left + 1) / 2), _mm512_castsi512_ps(pairs));
  }
}

// ---- AVX2 + FMA: tile 6 x 16 ----
constexpr int kMr256 = 6, kNr256 = 16;

template <int R>
__attribute__((target("avx2,fma"))) void TileAvx2(int64_t kc, const float* ap, const float* bp,
                                                  int64_t ldb, float alpha, float beta, float* c,
                                                  int64_t ldc, int cols, const SgdUpdate* sgd) {
  __m256 acc0[R], acc1[R];
#pragma GCC unroll 6
  for (int r = 0; r < R; ++r) acc0[r] = acc1[r] = _mm256_setzero_ps();
  for (int64_t p = 0; p < kc; ++p) {
    const __m256 b0 = _mm256_loadu_ps(bp), b1 = _mm256_loadu_ps(bp + 8);
#pragma GCC unroll 6
    for (int r = 0; r < R; ++r) {
      const __m256 a = _mm256_broadcast_ss(ap + r);
      acc0[r] = _mm256_fmadd_ps(a, b0, acc0[r]);
      acc1[r] = _mm256_fmadd_ps(a, b1, acc1[r]);
    }
    ap += kMr256;
    bp += ldb;
  }
  const __m256 va = _mm256_set1_ps(alpha), vb = _mm256_set1_ps(beta);
  for (int r = 0; r < R; ++r) {
    float* cr = c + r * ldc;
    alignas(32) float row[kNr256];
    _mm256_store_ps(row, _mm256_mul_ps(va, acc0[r]));
    _mm256_store_ps(row + 8, _mm256_mul_ps(va, acc1[r]));
    if (sgd != nullptr) {
      for (int j = 0; j < cols; ++j) row[j] = beta != 0.0f ? beta * cr[j] + row[j] : row[j];
      SgdEntries(*sgd, row, sgd->w + r * sgd->ld, sgd->v + r * sgd->ld, cols);
    } else if (cols == kNr256) {
      __m256 v0 = _mm256_load_ps(row), v1 = _mm256_load_ps(row + 8);
      if (beta != 0.0f) {
        v0 = _mm256_fmadd_ps(vb, _mm256_loadu_ps(cr), v0);
        v1 = _mm256_fmadd_ps(vb, _mm256_loadu_ps(cr + 8), v1);
      }
      _mm256_storeu_ps(cr, v0);
      _mm256_storeu_ps(cr + 8, v1);
    } else {
      for (int j = 0; j < cols; ++j) cr[j] = beta != 0.0f ? beta * cr[j] + row[j] : row[j];
    }
  }
}

// ---- Transposing copies for packing ----
void TransposePortable(const float* src, int64_t ld_src, int rows, int64_t cols, float* dst,
                       int64_t ld_dst) {
  for (int64_t q = 0; q < cols; ++q) {
    for (int r = 0; r < rows; ++r) dst[q * ld_dst + r] = src[r * ld_src + q];
  }
}

// AVX (every AVX2 or AVX-512 CPU has it): 8 x 8 blocks through the usual unpack / shuffle /
// lane-swap network, 24 shuffles for 64 floats instead of 64 scalar strided stores; the edges
// element by element.
__attribute__((target("avx"))) inline void Transpose8x8Avx(const float* src, int64_t ld_src,
                                                           float* dst, int64_t ld_dst) {
  __m256 r[8], t[8];
  for (int i = 0; i < 8; ++i) r[i] = _mm256_loadu_ps(src + i * ld_src);
  for (int i = 0; i < 8; i += 2) {
    t[i] = _mm256_unpacklo_ps(r[i], r[i + 1]);
    t[i + 1] = _mm256_unpackhi_ps(r[i], r[i + 1]);
  }
  for (int i = 0; i < 8; i += 4) {
    r[i] = _mm256_shuffle_ps(t[i], t[i + 2], _MM_SHUFFLE(1, 0, 1, 0));
    r[i + 1] = _mm256_shuffle_ps(t[i], t[i + 2], _MM_SHUFFLE(3, 2, 3, 2));
    r[i + 2] = _mm256_shuffle_ps(t[i + 1], t[i + 3], _MM_SHUFFLE(1, 0, 1, 0));
    r[i + 3] = _mm256_shuffle_ps(t[i + 1], t[i + 3], _MM_SHUFFLE(3, 2, 3, 2));
  }
  for (int i = 0; i < 4; ++i) {
    _mm256_storeu_ps(dst + i * ld_dst, _mm256_permute2f128_ps(r[i], r[i + 4], 0x20));
    _mm256_storeu_ps(dst + (i + 4) * ld_dst, _mm256_permute2f128_ps(r[i], r[i + 4], 0x31));
  }
}

// 4 x 8 blocks: the same network on half the rows, each output row 4 floats.
__attribute__((target("avx"))) inline void Transpose4x8Avx(const float* src, int64_t ld_src,
                                                           float* dst, int64_t ld_dst) {
  __m256 r[4], t[4];
  for (int i = 0; i < 4; ++i) r[i] = _mm256_loadu_ps(src + i * ld_src);
  t[0] = _mm256_unpacklo_ps(r[0], r[1]);
  t[1] = _mm256_unpackhi_ps(r[0], r[1]);
  t[2] = _mm256_unpacklo_ps(r[2], r[3]);
  t[3] = _mm256_unpackhi_ps(r[2], r[3]);
  r[0] = _mm256_shuffle_ps(t[0], t[2], _MM_SHUFFLE(1, 0, 1, 0));
  r[1] = _mm256_shuffle_ps(t[0], t[2], _MM_SHUFFLE(3, 2, 3, 2));
  r[2] = _mm256_shuffle_ps(t[1], t[3], _MM_SHUFFLE(1, 0, 1, 0));
  r[3] = _mm256_shuffle_ps(t[1], t[3], _MM_SHUFFLE(3, 2, 3, 2));
  for (int i = 0; i < 4; ++i) {
    _mm_storeu_ps(dst + i * ld_dst, _mm256_castps256_ps128(r[i]));
    _mm_storeu_ps(dst + (i + 4) * ld_dst, _mm256_extractf128_ps(r[i], 1));
  }
}

__attribute__((target("avx"))) void TransposeAvx(const float* src, int64_t ld_src, int rows,
                                                 int64_t cols, float* dst, int64_t ld_dst) {
  const int rows8 = rows - rows % 8;
  const int rows4 = rows - rows % 4;
  const int64_t cols8 = cols - cols % 8;
  for (int r = 0; r < rows8; r += 8) {
    for (int64_t q = 0; q < cols8; q += 8) {
      Transpose8x8Avx(src + r * ld_src + q, ld_src, dst + q * ld_dst + r, ld_dst);
    }
  }
  if (rows8 < rows4) {
    for (int64_t q = 0; q < cols8; q += 8) {
      Transpose4x8Avx(src + rows8 * ld_src + q, ld_src, dst + q * ld_dst + rows8, ld_dst);
    }
  }
  if (rows4 < rows) TransposePortable(src + rows4 * ld_src, ld_src, rows - rows4, cols8, dst + rows4, ld_dst);
  TransposePortable(src + cols8, ld_src, rows, cols - cols8, dst + cols8 * ld_dst, ld_dst);
}

// ---- Portable: tile 4 x 16, plain loops the compiler vectorises for the baseline ISA ----
constexpr int kMrPortable = 4, kNrPortable = 16;

void TilePortable(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha,
                  float beta, float* c, int64_t ldc, int rows, int cols, const SgdUpdate* sgd) {
  float acc[kMrPortable][kNrPortable] = {};
  for (int64_t p = 0; p < kc; ++p) {
    for (int r = 0; r < kMrPortable; ++r) {
      for (int j = 0; j < kNrPortable; ++j) acc[r][j] += ap[r] * bp[j];
    }
    ap += kMrPortable;
    bp += ldb;
  }
  for (int r = 0; r < rows; ++r) {
    float* cr = c + r * ldc;
    float g[kNrPortable];
    for (int j = 0; j < cols; ++j) {
      const float v = alpha * acc[r][j];
      g[j] = beta != 0.0f ? beta * cr[j] + v : v;
    }
    if (sgd == nullptr) std::copy(g, g + cols, cr);
    else SgdEntries(*sgd, g, sgd->w + r * sgd->ld, sgd->v + r * sgd->ld, cols);
  }
}

// Row-count dispatch: one instantiation per tile height keeps every accumulator in a register.
using TileFn = void (*)(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha,
                        float beta, float* c, int64_t ldc, int cols, const SgdUpdate* sgd);

template <bool kWide, size_t... kRows>
constexpr std::array<TileFn, sizeof...(kRows)> Avx512Tiles(std::index_sequence<kRows...>) {
  return {&TileAvx512<static_cast<int>(kRows) + 1, kWide>...};
}
template <size_t... kRows>
constexpr std::array<TileFn, sizeof...(kRows)> Avx2Tiles(std::index_sequence<kRows...>) {
  return {&TileAvx2<static_cast<int>(kRows) + 1>...};
}
template <bool kWide, size_t... kRows>
constexpr std::array<TileFn, sizeof...(kRows)> Avx512Bf16Tiles(std::index_sequence<kRows...>) {
  return {&TileAvx512Bf16<static_cast<int>(kRows) + 1, kWide>...};
}
constexpr auto kAvx512Wide = Avx512Tiles<true>(std::make_index_sequence<kMr512>{});
constexpr auto kAvx512Narrow = Avx512Tiles<false>(std::make_index_sequence<kMr512>{});
constexpr auto kAvx512Bf16Wide = Avx512Bf16Tiles<true>(std::make_index_sequence<kMr512>{});
constexpr auto kAvx512Bf16Narrow = Avx512Bf16Tiles<false>(std::make_index_sequence<kMr512>{});
constexpr auto kAvx2 = Avx2Tiles(std::make_index_sequence<kMr256>{});

void DispatchAvx512(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha,
                    float beta, float* c, int64_t ldc, int rows, int cols, const SgdUpdate* sgd) {
  const auto& tiles = cols <= 16 ? kAvx512Narrow : kAvx512Wide;
  tiles[rows - 1](kc, ap, bp, ldb, alpha, beta, c, ldc, cols, sgd);
}

void DispatchAvx512Bf16(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha,
                        float beta, float* c, int64_t ldc, int rows, int cols,
                        const SgdUpdate* sgd) {
  const auto& tiles = cols <= 16 ? kAvx512Bf16Narrow : kAvx512Bf16Wide;
  tiles[rows - 1](kc, ap, bp, ldb, alpha, beta, c, ldc, cols, sgd);
}

void DispatchAvx2(int64_t kc, const float* ap, const float* bp, int64_t ldb, float alpha,
                  float beta, float* c, int64_t ldc, int rows, int cols, const SgdUpdate* sgd) {
  kAvx2[rows - 1](kc, ap, bp, ldb, alpha, beta, c, ldc, cols, sgd);
}

}  // namespace

const GemmKernel* Avx512Kernel() {
  static const GemmKernel kernel{"avx512", kMr512, kNr512, DispatchAvx512, TransposeAvx};
  return __builtin_cpu_supports("avx512f") ? &kernel : nullptr;
}

const GemmKernel* Avx512Bf16Kernel() {
  static const GemmKernel kernel{"avx512-bf16", kMr512,           kNr512, DispatchAvx512Bf16,
                                 TransposeAvx,  true,             PairRowsAvx512,
                                 PairAdjacentAvx512};
  return __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") &&
                 __builtin_cpu_supports("avx512bf16")
             ? &kernel
             : nullptr;
}

const GemmKernel* Avx2Kernel() {
  static const GemmKernel kernel{"avx2", kMr256, kNr256, DispatchAvx2, TransposeAvx};
  return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma") ? &kernel : nullptr;
}

const GemmKernel& PortableKernel() {
  static const GemmKernel kernel{"portable", kMrPortable, kNrPortable, TilePortable, TransposePortable};
  return kernel;
}

const GemmKernel& BestGemmKernel() {
  static const GemmKernel& best = Avx512Kernel()   ? *Avx512Kernel()
                                  : Avx2Kernel()   ? *Avx2Kernel()
                                                   : PortableKernel();
  return best;
}

}  // namespace chorus

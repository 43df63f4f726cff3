#include "common/conv_front.h"

#include <algorithm>
#include <atomic>
#include <cassert>
#include <cmath>
#include <immintrin.h>
#include <string>

#include "common/activation.h"
#include "common/gemm.h"
#include "common/mlp.h"

namespace chorus {
namespace {

constexpr int kMaxConvChannels = 4096;
constexpr int kMaxConvKernel = 15;
constexpr int kMaxImageSide = 65536;

// Copies n floats (GCC makes a memmove call of this loop).
[[gnu::always_inline]] inline void CopyRun(const float* __restrict src, int64_t n, float* __restrict dst) {
  for (int64_t t = 0; t < n; ++t) dst[t] = src[t];
}

[[gnu::always_inline]] inline void AddRun(const float* __restrict src, int64_t n, float* __restrict dst) {
  for (int64_t t = 0; t < n; ++t) dst[t] += src[t];
}

// The taps dx in [lo, hi) of a k-wide kernel row centred at x that fall inside [0, width).
struct TapRange {
  int lo, hi;
};
[[gnu::always_inline]] inline TapRange TapsInside(int x, const ConvFront::Stage& g) {
  return {std::max(0, g.pad - x), std::min(g.kernel, g.width + g.pad - x)};
}

// The first stage's unfolding, transposed: row (dy k + dx) C + c, column (i H + y) W + x of
// `columns_t` (ld floats apart) holds input channel c at (y + dy - pad, x + dx - pad) of sample
// i, or 0 outside the image. The input is channel-major, so each row is made of whole image rows,
// shifted: runs of about W floats, where the untransposed form would copy runs of k (a stage on
// 1 x 28 x 28 images took about 18% less time forward and backward; BENCHMARKS.md).
void UnfoldTransposed(const float* in, int64_t samples, const ConvFront::Stage& g, float* columns_t, int64_t ld) {
  const int k = g.kernel;
  for (int dy = 0; dy < k; ++dy) {
    for (int dx = 0; dx < k; ++dx) {
      const TapRange inside = {std::max(0, g.pad - dx), std::min(g.width, g.width + g.pad - dx)};
      for (int c = 0; c < g.in_channels; ++c) {
        float* dst = columns_t + ((int64_t{dy} * k + dx) * g.in_channels + c) * ld;
        for (int64_t i = 0; i < samples; ++i) {
          const float* channel = in + (i * g.in_channels + c) * g.Pixels();
          for (int y = 0; y < g.height; ++y, dst += g.width) {
            const int iy = y + dy - g.pad;
            if (iy < 0 || iy >= g.height || inside.lo >= inside.hi) {
              std::fill(dst, dst + g.width, 0.0f);
              continue;
            }
            const float* src = channel + int64_t{iy} * g.width + (dx - g.pad);
            std::fill(dst, dst + inside.lo, 0.0f);
            std::copy(src + inside.lo, src + inside.hi, dst + inside.lo);
            std::fill(dst + inside.hi, dst + g.width, 0.0f);
          }
        }
      }
    }
  }
}

// Whether the passes below run compiled for AVX-512 (each has a baseline x86-64 twin; both give
// the same bits, as the passes only move, compare and add element by element): where the CPU
// has it, unless a test asked for the baselines (ForceBaselineConvPasses).
std::atomic<bool>& Avx512PassesFlag() {
  static std::atomic<bool> flag{__builtin_cpu_supports("avx512f") != 0};
  return flag;
}

bool Avx512Passes() { return Avx512PassesFlag().load(std::memory_order_relaxed); }

// Unfolds `samples` samples of a channels-last input (a later stage's) into columns: row
// (i H + y) W + x, column (dy k + dx) C + c holds input channel c at (y + dy - pad, x + dx - pad)
// of sample i, or 0 outside the image. Each kernel row's taps inside the image are one run of
// the input.
void UnfoldBaseline(const float* in, int64_t samples, const ConvFront::Stage& g, float* columns) {
  const int k = g.kernel, c_in = g.in_channels;
  const int64_t span = int64_t{k} * c_in;
  float* dst = columns;
  for (int64_t i = 0; i < samples; ++i) {
    const float* sample = in + i * g.Pixels() * c_in;
    for (int y = 0; y < g.height; ++y) {
      for (int x = 0; x < g.width; ++x) {
        const TapRange taps = TapsInside(x, g);
        for (int dy = 0; dy < k; ++dy, dst += span) {
          const int iy = y + dy - g.pad;
          if (iy < 0 || iy >= g.height) {
            std::fill(dst, dst + span, 0.0f);
            continue;
          }
          std::fill(dst, dst + int64_t{taps.lo} * c_in, 0.0f);
          std::fill(dst + int64_t{taps.hi} * c_in, dst + span, 0.0f);
          const float* src = sample + (int64_t{iy} * g.width + x + taps.lo - g.pad) * c_in;
          CopyRun(src, int64_t{taps.hi - taps.lo} * c_in, dst + int64_t{taps.lo} * c_in);
        }
      }
    }
  }
}

// The same in AVX-512 moves: each kernel row's span is written whole, 16 lanes at a time, the
// taps outside the image loaded as 0 by the load's mask (no lane outside the input is read). In
// place of a memmove and two memsets per kernel row it took about 25% less time forward and
// backward (BENCHMARKS.md). Its loops repeat UnfoldBaseline's: GCC will not inline the AVX-512
// moves into a shared skeleton compiled for baseline x86-64.
__attribute__((target("avx512f"))) void UnfoldAvx512(const float* in, int64_t samples, const ConvFront::Stage& g,
                                                     float* columns) {
  const int k = g.kernel, c_in = g.in_channels;
  const int64_t span = int64_t{k} * c_in;
  float* dst = columns;
  for (int64_t i = 0; i < samples; ++i) {
    const float* sample = in + i * g.Pixels() * c_in;
    for (int y = 0; y < g.height; ++y) {
      for (int x = 0; x < g.width; ++x) {
        const TapRange taps = TapsInside(x, g);
        for (int dy = 0; dy < k; ++dy, dst += span) {
          const int iy = y + dy - g.pad;
          const bool inside = iy >= 0 && iy < g.height;
          // Lane l of the span is row[l], for l in [lo, hi).
          const int64_t lo = inside ? int64_t{taps.lo} * c_in : 0, hi = inside ? int64_t{taps.hi} * c_in : 0;
          const float* row = inside ? sample + (int64_t{iy} * g.width + x - g.pad) * c_in : sample;
          for (int64_t t = 0; t < span; t += 16) {
            const int64_t n = std::min<int64_t>(16, span - t), a = std::max<int64_t>(lo - t, 0),
                          b = std::min<int64_t>(hi - t, n);
            const __mmask16 load = b > a ? static_cast<__mmask16>(((1u << b) - 1) & ~((1u << a) - 1)) : 0;
            const __m512 v = _mm512_maskz_loadu_ps(load, row + t);
            if (n == 16) _mm512_storeu_ps(dst + t, v);
            else _mm512_mask_storeu_ps(dst + t, static_cast<__mmask16>((1u << n) - 1), v);
          }
        }
      }
    }
  }
}

void Unfold(const float* in, int64_t samples, const ConvFront::Stage& g, float* columns) {
  if (Avx512Passes()) return UnfoldAvx512(in, samples, g, columns);
  UnfoldBaseline(in, samples, g, columns);
}

// The adjoint of Unfold for a channels-last input: adds each column entry back onto the input
// pixel it was copied from, in column order. `in_grad` (samples H W C floats) is overwritten.
[[gnu::always_inline]] inline void FoldBody(const float* columns, int64_t samples, const ConvFront::Stage& g,
                                            float* in_grad) {
  const int k = g.kernel, c_in = g.in_channels;
  const int64_t span = int64_t{k} * c_in;
  const int64_t row = int64_t{g.width} * c_in;
  std::fill(in_grad, in_grad + samples * g.Pixels() * c_in, 0.0f);
  const float* src = columns;
  for (int64_t i = 0; i < samples; ++i) {
    float* sample = in_grad + i * g.Pixels() * c_in;
    for (int y = 0; y < g.height; ++y) {
      for (int x = 0; x < g.width; ++x) {
        const TapRange taps = TapsInside(x, g);
        for (int dy = 0; dy < k; ++dy, src += span) {
          const int iy = y + dy - g.pad;
          if (iy < 0 || iy >= g.height) continue;
          AddRun(src + int64_t{taps.lo} * c_in, int64_t{taps.hi - taps.lo} * c_in,
                 sample + iy * row + int64_t{x + taps.lo - g.pad} * c_in);
        }
      }
    }
  }
}

__attribute__((target("avx512f"))) void FoldAvx512(const float* columns, int64_t samples, const ConvFront::Stage& g,
                                                   float* in_grad) {
  FoldBody(columns, samples, g, in_grad);
}

void Fold(const float* columns, int64_t samples, const ConvFront::Stage& g, float* in_grad) {
  if (Avx512Passes()) return FoldAvx512(columns, samples, g, in_grad);
  FoldBody(columns, samples, g, in_grad);
}

// Calls visit(sample, top_row, out_row) for every 2 x 2 window of a stage's pixel rows: the
// window's pixels are rows top, top + 1, top + W, top + W + 1; out_row is its pooled row.
template <typename Visit>
[[gnu::always_inline]] inline void ForEachWindow(const ConvFront::Stage& g, int64_t samples, const Visit& visit) {
  for (int64_t i = 0; i < samples; ++i) {
    for (int oy = 0; oy < g.out_height; ++oy) {
      for (int ox = 0; ox < g.out_width; ++ox) {
        visit((i * g.height + 2 * oy) * g.width + 2 * ox, (i * g.out_height + oy) * g.out_width + ox);
      }
    }
  }
}

// Calls visit(row) for every pixel row in no window: the last row or column of an odd image.
template <typename Visit>
[[gnu::always_inline]] inline void ForEachUnpooledPixel(const ConvFront::Stage& g, int64_t samples, const Visit& visit) {
  if (g.height % 2 == 0 && g.width % 2 == 0) return;
  for (int64_t i = 0; i < samples; ++i) {
    for (int y = 0; y < g.height; ++y) {
      for (int x = 0; x < g.width; ++x) {
        if (y >= 2 * g.out_height || x >= 2 * g.out_width) visit((i * g.height + y) * g.width + x);
      }
    }
  }
}

// One 2 x 2 window of BiasActivateAndPool over c channels: z0..z3 are the window's pixel rows
// in order (0,0), (0,1), (1,0), (1,1). Distinct rows, hence restrict: the loops vectorise.
// Average adds the bias to z in place (backward reads z); max writes the winner's z to `best_z`.
template <typename Act>
[[gnu::always_inline]] inline void PoolWindow(const Act act, Pooling pool, int64_t c, const float* __restrict bias,
                                              float* __restrict z0, float* __restrict z1, float* __restrict z2,
                                              float* __restrict z3, float* __restrict dst, uint8_t* __restrict best,
                                              float* __restrict best_z) {
  if (pool == Pooling::kAverage) {
    for (int64_t j = 0; j < c; ++j) {
      z0[j] += bias[j];
      z1[j] += bias[j];
      z2[j] += bias[j];
      z3[j] += bias[j];
      dst[j] = 0.25f * (((act(z0[j]) + act(z1[j])) + act(z2[j])) + act(z3[j]));
    }
    return;
  }
  // Blocks of channels, each loop of one element type, so that each vectorises whole.
  constexpr int64_t kBlock = 64;
  float a[4][kBlock];
  int32_t winner[kBlock];
  for (int64_t j0 = 0; j0 < c; j0 += kBlock) {
    const int64_t n = std::min(kBlock, c - j0);
    for (int64_t j = 0; j < n; ++j) {
      a[0][j] = act(z0[j0 + j] + bias[j0 + j]);
      a[1][j] = act(z1[j0 + j] + bias[j0 + j]);
      a[2][j] = act(z2[j0 + j] + bias[j0 + j]);
      a[3][j] = act(z3[j0 + j] + bias[j0 + j]);
    }
    for (int64_t j = 0; j < n; ++j) {
      // As a tree, with selects the compiler vectorises; the same winner as a scan in window
      // order in which a later value wins only if greater.
      const float a0 = a[0][j], a1 = a[1][j], a2 = a[2][j], a3 = a[3][j];
      const float top = a1 > a0 ? a1 : a0, bottom = a3 > a2 ? a3 : a2;
      const float top_z = a1 > a0 ? z1[j0 + j] : z0[j0 + j], bottom_z = a3 > a2 ? z3[j0 + j] : z2[j0 + j];
      dst[j0 + j] = bottom > top ? bottom : top;
      best_z[j0 + j] = (bottom > top ? bottom_z : top_z) + bias[j0 + j];
      const int32_t right_top = a1 > a0, right_bottom = a3 > a2, in_bottom = bottom > top;
      winner[j] = 2 * in_bottom + (in_bottom & right_bottom) + ((1 - in_bottom) & right_top);
    }
    for (int64_t j = 0; j < n; ++j) best[j0 + j] = static_cast<uint8_t>(winner[j]);
  }
}

// For a pooled stage, in one pass over the pre-activations z of `samples` samples (channels-last
// (samples H W) x C, z[row * C + channel]): adds the bias, applies the activation and pools 2 x 2
// at stride 2 into `pooled` ((samples H' W') x C). Max keeps the first of equal values in window
// order (0,0), (0,1), (1,0), (1,1), as PyTorch does, and records it in `argmax` and its z (bias
// included) in `argmax_z`, all backward needs; average is ((a0 + a1) + a2) + a3 over 4 and leaves
// the bias added to z, for backward. The activations themselves are never stored.
template <typename Act>
[[gnu::always_inline]] inline void BiasActivateAndPoolBody(const Act act, const ConvFront::Stage& g, int64_t samples,
                                                           const float* bias, float* z, float* pooled,
                                                           uint8_t* argmax, float* argmax_z) {
  const int64_t c = g.out_channels;
  const bool max = g.pool == Pooling::kMax;
  ForEachWindow(g, samples, [&](int64_t top, int64_t out_row) {
    PoolWindow(act, g.pool, c, bias, z + top * c, z + (top + 1) * c, z + (top + g.width) * c,
               z + (top + g.width + 1) * c, pooled + out_row * c, max ? argmax + out_row * c : nullptr,
               max ? argmax_z + out_row * c : nullptr);
  });
  if (max) return;
  ForEachUnpooledPixel(g, samples, [&](int64_t row) {
    for (int64_t j = 0; j < c; ++j) z[row * c + j] += bias[j];
  });
}

template <typename Act>
__attribute__((target("avx512f"))) void BiasActivateAndPoolAvx512(const Act act, const ConvFront::Stage& g,
                                                                  int64_t samples, const float* bias, float* z,
                                                                  float* pooled, uint8_t* argmax, float* argmax_z) {
  BiasActivateAndPoolBody(act, g, samples, bias, z, pooled, argmax, argmax_z);
}

void BiasActivateAndPool(Activation activation, const ConvFront::Stage& g, int64_t samples, const float* bias,
                         float* z, float* pooled, uint8_t* argmax, float* argmax_z) {
  WithActivation(activation, [&](const auto act) {
    if (Avx512Passes()) return BiasActivateAndPoolAvx512(act, g, samples, bias, z, pooled, argmax, argmax_z);
    BiasActivateAndPoolBody(act, g, samples, bias, z, pooled, argmax, argmax_z);
  });
}

// The adjoint of one average-pooled window's pixel row: a quarter of the window's gradient,
// times the activation's derivative at z.
template <typename Act>
[[gnu::always_inline]] inline void UnpoolAverageRow(const Act act, int64_t c, const float* __restrict src,
                                                    const float* __restrict z, float* __restrict dst) {
  for (int64_t j = 0; j < c; ++j) dst[j] = act.Backward(0.25f * src[j], z[j]);
}

// d[j] = g[j] where window position p won channel j, else 0.
[[gnu::always_inline]] inline void WinnerRow(const uint8_t* __restrict best, const float* __restrict g, int32_t p,
                                             int64_t n, float* __restrict d) {
  for (int64_t j = 0; j < n; ++j) {
    const int32_t winner = best[j];  // widened first, or the loop does not vectorise
    d[j] = winner == p ? g[j] : 0.0f;
  }
}

// The adjoint of one max-pooled window: the gradient times the activation's derivative at the
// winner's z goes to the winner's pixel row d[winner], 0 to the others. Blocks of channels, so
// that each derivative is taken once and each loop vectorises.
template <typename Act>
[[gnu::always_inline]] inline void UnpoolMaxWindow(const Act act, int64_t c, const float* __restrict src,
                                                   const uint8_t* __restrict best, const float* __restrict best_z,
                                                   float* const d[4]) {
  constexpr int64_t kBlock = 64;
  float g[kBlock];
  for (int64_t j0 = 0; j0 < c; j0 += kBlock) {
    const int64_t n = std::min(kBlock, c - j0);
    for (int64_t j = 0; j < n; ++j) g[j] = act.Backward(src[j0 + j], best_z[j0 + j]);
    for (int32_t p = 0; p < 4; ++p) WinnerRow(best + j0, g, p, n, d[p] + j0);
  }
}

// The adjoint of BiasActivateAndPool for `samples` samples, in one pass: from dL/d(pooled) and
// argmax and argmax_z (max) or z (average), writes dL/dz into `grad` (shaped as z). A window's
// gradient goes to its winner (max) or a quarter to each pixel (average), times the activation's
// derivative; pixels in no window get 0.
template <typename Act>
[[gnu::always_inline]] inline void UnpoolThroughActivationBody(const Act act, const ConvFront::Stage& g,
                                                               int64_t samples, const float* pooled_grad,
                                                               const uint8_t* argmax, const float* argmax_z,
                                                               const float* z, float* grad) {
  const int64_t c = g.out_channels;
  const bool max = g.pool == Pooling::kMax;
  ForEachWindow(g, samples, [&](int64_t top, int64_t out_row) {
    const int64_t rows[4] = {top, top + 1, top + g.width, top + g.width + 1};
    const float* src = pooled_grad + out_row * c;
    if (max) {
      float* const d[4] = {grad + rows[0] * c, grad + rows[1] * c, grad + rows[2] * c, grad + rows[3] * c};
      UnpoolMaxWindow(act, c, src, argmax + out_row * c, argmax_z + out_row * c, d);
      return;
    }
    for (int64_t row : rows) UnpoolAverageRow(act, c, src, z + row * c, grad + row * c);
  });
  ForEachUnpooledPixel(g, samples, [&](int64_t row) {
    for (int64_t j = 0; j < c; ++j) grad[row * c + j] = max ? 0.0f : act.Backward(0.0f, z[row * c + j]);
  });
}

template <typename Act>
__attribute__((target("avx512f"))) void UnpoolThroughActivationAvx512(const Act act, const ConvFront::Stage& g,
                                                                      int64_t samples, const float* pooled_grad,
                                                                      const uint8_t* argmax, const float* argmax_z,
                                                                      const float* z, float* grad) {
  UnpoolThroughActivationBody(act, g, samples, pooled_grad, argmax, argmax_z, z, grad);
}

void UnpoolThroughActivation(Activation activation, const ConvFront::Stage& g, int64_t samples,
                             const float* pooled_grad, const uint8_t* argmax, const float* argmax_z, const float* z,
                             float* grad) {
  WithActivation(activation, [&](const auto act) {
    if (Avx512Passes()) {
      return UnpoolThroughActivationAvx512(act, g, samples, pooled_grad, argmax, argmax_z, z, grad);
    }
    UnpoolThroughActivationBody(act, g, samples, pooled_grad, argmax, argmax_z, z, grad);
  });
}

// Samples per chunk of a stage: as many as fit chunk_bytes of unfolded input and
// pre-activations, at least 1 and at most max_rows (when that is positive).
int64_t ChunkSamples(const ConvFront::Stage& g, int64_t max_rows, int64_t chunk_bytes) {
  const int64_t bytes_per_sample = g.Pixels() * (g.KernelRows() + g.out_channels) * int64_t{sizeof(float)};
  return std::max<int64_t>(1, std::min(max_rows, chunk_bytes / bytes_per_sample));
}

std::vector<ConvFront::Stage> Geometry(const ImageShape& input, const std::vector<ConvStage>& stages) {
  std::vector<ConvFront::Stage> out;
  int c = input.channels, h = input.height, w = input.width;
  for (const ConvStage& s : stages) {
    ConvFront::Stage g{c, h, w, s.channels, s.kernel, s.kernel / 2, s.pool, h, w};
    if (s.pool != Pooling::kNone) {
      g.out_height = h / 2;
      g.out_width = w / 2;
    }
    out.push_back(g);
    c = g.out_channels;
    h = g.out_height;
    w = g.out_width;
  }
  return out;
}

}  // namespace

std::string CheckConvStages(const ImageShape& input, const std::vector<ConvStage>& stages) {
  for (int d : {input.channels, input.height, input.width}) {
    if (d < 1 || d > kMaxImageSide) {
      return "image: expected channels, height and width each in [1, " + std::to_string(kMaxImageSide) + "]";
    }
  }
  if (stages.empty() || static_cast<int>(stages.size()) > kMaxConvStages) {
    return "expected 1 to " + std::to_string(kMaxConvStages) + " stages";
  }
  int h = input.height, w = input.width;
  for (size_t i = 0; i < stages.size(); ++i) {
    const ConvStage& s = stages[i];
    const std::string where = "stage " + std::to_string(i + 1) + ": ";
    if (s.channels < 1 || s.channels > kMaxConvChannels) {
      return where + "expected channels in [1, " + std::to_string(kMaxConvChannels) + "]";
    }
    if (s.kernel < 1 || s.kernel > kMaxConvKernel || s.kernel % 2 == 0) {
      return where + "expected an odd kernel in [1, " + std::to_string(kMaxConvKernel) + "]";
    }
    if (s.pool != Pooling::kNone) {
      if (h < 2 || w < 2) {
        return where + "its input is " + std::to_string(h) + " x " + std::to_string(w) +
               ", too small to pool 2 x 2";
      }
      h /= 2;
      w /= 2;
    }
  }
  return "";
}

int64_t ConvParameterCount(const ImageShape& input, const std::vector<ConvStage>& stages) {
  if (!CheckConvStages(input, stages).empty()) return -1;
  int64_t count = 0;
  for (const ConvFront::Stage& g : Geometry(input, stages)) count += (g.KernelRows() + 1) * g.out_channels;
  return count;
}

ConvFront::ConvFront(ImageShape input, const std::vector<ConvStage>& stages, Activation activation)
    : input_(input), activation_(activation), stages_(Geometry(input, stages)) {
  assert(CheckConvStages(input, stages).empty());
  for (const Stage& g : stages_) {
    offsets_.push_back(parameter_count_);
    parameter_count_ += (g.KernelRows() + 1) * g.out_channels;
  }
}

int64_t ConvFront::Outputs() const {
  if (stages_.empty()) return Inputs();
  const Stage& g = stages_.back();
  return g.OutPixels() * g.out_channels;
}

void ForceBaselineConvPasses(bool baseline) {
  Avx512PassesFlag().store(!baseline && __builtin_cpu_supports("avx512f"), std::memory_order_relaxed);
}

ConvFront::Workspace ConvFront::MakeWorkspace(int64_t max_rows, int64_t chunk_bytes) const {
  Workspace ws;
  int64_t column_floats = 0, grad_floats = 0;
  for (const Stage& g : stages_) {
    const bool pooled = g.pool != Pooling::kNone;
    const int64_t chunk = ChunkSamples(g, max_rows, chunk_bytes);
    ws.chunk_samples.push_back(chunk);
    const bool max = g.pool == Pooling::kMax;
    ws.pre.emplace_back((max ? chunk : max_rows) * g.Pixels(), g.out_channels);
    ws.post.emplace_back(pooled ? 0 : max_rows * g.Pixels(), g.out_channels);
    ws.grad.emplace_back(pooled ? 0 : max_rows * g.Pixels(), g.out_channels);
    ws.pooled.emplace_back(pooled ? max_rows * g.OutPixels() : 0, g.out_channels);
    ws.grad_pooled.emplace_back(pooled ? max_rows * g.OutPixels() : 0, g.out_channels);
    ws.argmax.emplace_back(max ? max_rows * g.OutPixels() * g.out_channels : 0);
    ws.argmax_z.emplace_back(max ? max_rows * g.OutPixels() : 0, g.out_channels);
    column_floats = std::max(column_floats, chunk * g.Pixels() * g.KernelRows());
    if (pooled) grad_floats = std::max(grad_floats, chunk * g.Pixels() * g.out_channels);
  }
  ws.columns.resize(column_floats, 1);
  ws.chunk_grad.resize(grad_floats, 1);
  return ws;
}

int64_t ConvFront::WorkspaceFloats(int64_t max_rows, int64_t chunk_bytes) const {
  int64_t floats = 0, column_floats = 0, grad_floats = 0;
  for (const Stage& g : stages_) {
    const int64_t chunk = ChunkSamples(g, max_rows, chunk_bytes);
    const int64_t c = g.out_channels;
    switch (g.pool) {
      case Pooling::kMax:  // pre (one chunk); pooled, its gradient, the winners' z; the winners
        floats += chunk * g.Pixels() * c + 3 * max_rows * g.OutPixels() * c + (max_rows * g.OutPixels() * c + 3) / 4;
        break;
      case Pooling::kAverage:  // pre; pooled and its gradient
        floats += max_rows * (g.Pixels() + 2 * g.OutPixels()) * c;
        break;
      case Pooling::kNone:  // pre, post and its gradient
        floats += 3 * max_rows * g.Pixels() * c;
        break;
    }
    column_floats = std::max(column_floats, chunk * g.Pixels() * g.KernelRows());
    if (g.pool != Pooling::kNone) grad_floats = std::max(grad_floats, chunk * g.Pixels() * c);
  }
  return floats + column_floats + grad_floats;
}

void ConvFront::Initialize(Philox& rng, float* params) const {
  const double gain2 = activation_ == Activation::kTanh ? 1.0 : 2.0;
  for (size_t s = 0; s < stages_.size(); ++s) {
    const Stage& g = stages_[s];
    const double sd = std::sqrt(gain2 / static_cast<double>(g.KernelRows()));
    float* w = params + WeightOffset(static_cast<int>(s));
    for (int64_t i = 0; i < g.KernelRows() * g.out_channels; ++i) w[i] = static_cast<float>(sd * rng.NextNormal());
    std::fill(params + BiasOffset(static_cast<int>(s)), params + BiasOffset(static_cast<int>(s)) + g.out_channels, 0.0f);
  }
}

const float* ConvFront::StageInput(int s, const ConstMatrixRef& x, const Workspace& ws) const {
  if (s == 0) return x.data();
  return stages_[s - 1].pool == Pooling::kNone ? ws.post[s - 1].data() : ws.pooled[s - 1].data();
}

Matrix& ConvFront::StageOutputGradient(int s, Workspace& ws) const {
  return stages_[s].pool == Pooling::kNone ? ws.grad[s] : ws.grad_pooled[s];
}

Eigen::Map<const Matrix> ConvFront::Forward(const float* params, const ConstMatrixRef& x,
                                            Workspace& ws) const {
  assert(x.cols() == Inputs() && x.outerStride() == Inputs());
  const int64_t rows = x.rows();
  for (int s = 0; s < static_cast<int>(stages_.size()); ++s) {
    const Stage& g = stages_[s];
    const float* in = StageInput(s, x, ws);
    const int64_t in_floats = g.in_channels * g.Pixels();  // per sample
    const float* bias = params + BiasOffset(s);
    Eigen::Map<const Matrix> kernel(params + WeightOffset(s), g.KernelRows(), g.out_channels);
    const int64_t chunk = ws.chunk_samples[s];
    // A max-pooled stage's pre-activations are one chunk's scratch (backward needs only the
    // winners'); the others' span the batch.
    const bool max = g.pool == Pooling::kMax;
    for (int64_t i0 = 0; i0 < rows; i0 += chunk) {
      const int64_t n = std::min(chunk, rows - i0);
      auto z = ws.pre[s].middleRows(max ? 0 : i0 * g.Pixels(), n * g.Pixels());
      if (s == 0) {
        Eigen::Map<Matrix> columns_t(ws.columns.data(), g.KernelRows(), n * g.Pixels());
        UnfoldTransposed(in + i0 * in_floats, n, g, columns_t.data(), columns_t.cols());
        Gemm(Transpose::kYes, Transpose::kNo, 1.0f, columns_t, kernel, 0.0f, z, ws.products);
      } else {
        Eigen::Map<Matrix> columns(ws.columns.data(), n * g.Pixels(), g.KernelRows());
        Unfold(in + i0 * in_floats, n, g, columns.data());
        Gemm(Transpose::kNo, Transpose::kNo, 1.0f, columns, kernel, 0.0f, z, ws.products);
      }
      if (g.pool == Pooling::kNone) {
        AddBiasAndActivate(activation_, bias, z, ws.post[s].middleRows(i0 * g.Pixels(), n * g.Pixels()));
        continue;
      }
      const int64_t out0 = i0 * g.OutPixels();
      BiasActivateAndPool(activation_, g, n, bias, z.data(), ws.pooled[s].row(out0).data(),
                          max ? ws.argmax[s].data() + out0 * g.out_channels : nullptr,
                          max ? ws.argmax_z[s].row(out0).data() : nullptr);
    }
  }
  const float* out = StageInput(static_cast<int>(stages_.size()), x, ws);
  return Eigen::Map<const Matrix>(out, rows, Outputs());
}

Eigen::Map<Matrix> ConvFront::OutputGradient(Workspace& ws, int64_t rows) const {
  return Eigen::Map<Matrix>(StageOutputGradient(static_cast<int>(stages_.size()) - 1, ws).data(), rows, Outputs());
}

void ConvFront::Backward(float* params, const ConstMatrixRef& x, Workspace& ws, float* grad,
                         const OptimizerConfig* optimizer, float lr, float* velocity) const {
  const int64_t rows = x.rows();
  for (int s = static_cast<int>(stages_.size()) - 1; s >= 0; --s) {
    const Stage& g = stages_[s];
    const float* in = StageInput(s, x, ws);
    const int64_t in_floats = g.in_channels * g.Pixels();  // per sample
    Eigen::Map<const Matrix> kernel(params + WeightOffset(s), g.KernelRows(), g.out_channels);
    Eigen::Map<Matrix> dkernel(grad + WeightOffset(s), g.KernelRows(), g.out_channels);
    Eigen::Map<Eigen::RowVectorXf> dbias(grad + BiasOffset(s), g.out_channels);
    if (rows == 0) {
      dkernel.setZero();
      dbias.setZero();
    }
    const int64_t chunk = ws.chunk_samples[s];
    const bool max = g.pool == Pooling::kMax;
    // Chunk by chunk: dZ (dL/dz); dK += columns^T dZ; db += 1^T dZ; for s > 0 also
    // dL/d(input) = Fold(dZ K^T), taken before K is updated.
    for (int64_t i0 = 0; i0 < rows; i0 += chunk) {
      const int64_t n = std::min(chunk, rows - i0);
      Eigen::Map<Matrix> dz(g.pool == Pooling::kNone ? ws.grad[s].row(i0 * g.Pixels()).data() : ws.chunk_grad.data(),
                            n * g.Pixels(), g.out_channels);
      if (g.pool == Pooling::kNone) {
        MultiplyActivationDerivative(activation_, ws.pre[s].middleRows(i0 * g.Pixels(), n * g.Pixels()), dz);
      } else {
        const int64_t out0 = i0 * g.OutPixels();
        UnpoolThroughActivation(activation_, g, n, ws.grad_pooled[s].row(out0).data(),
                                max ? ws.argmax[s].data() + out0 * g.out_channels : nullptr,
                                max ? ws.argmax_z[s].row(out0).data() : nullptr,
                                max ? nullptr : ws.pre[s].row(i0 * g.Pixels()).data(), dz.data());
      }
      const float beta = i0 == 0 ? 0.0f : 1.0f;
      if (i0 == 0) dbias = dz.colwise().sum();
      else dbias += dz.colwise().sum();
      if (s == 0) {
        Eigen::Map<Matrix> columns_t(ws.columns.data(), g.KernelRows(), n * g.Pixels());
        UnfoldTransposed(in + i0 * in_floats, n, g, columns_t.data(), columns_t.cols());
        Gemm(Transpose::kNo, Transpose::kNo, 1.0f, columns_t, dz, beta, dkernel, ws.products);
        continue;
      }
      Eigen::Map<Matrix> columns(ws.columns.data(), n * g.Pixels(), g.KernelRows());
      Unfold(in + i0 * in_floats, n, g, columns.data());
      Gemm(Transpose::kYes, Transpose::kNo, 1.0f, columns, dz, beta, dkernel, ws.products);
      // The unfolded input is spent: its buffer takes the gradient of the unfolded input.
      Gemm(Transpose::kNo, Transpose::kYes, 1.0f, dz, kernel, 0.0f, columns, ws.products);
      Fold(columns.data(), n, g, StageOutputGradient(s - 1, ws).row(i0 * g.Pixels()).data());
    }
    if (optimizer != nullptr) {
      const int64_t block = (g.KernelRows() + 1) * g.out_channels;
      SgdStep(*optimizer, lr, block, grad + WeightOffset(s), params + WeightOffset(s), velocity + WeightOffset(s));
    }
  }
}

}  // namespace chorus

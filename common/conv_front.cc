#include "common/conv_front.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <string>

#include "common/activation.h"
#include "common/gemm.h"
#include "common/mlp.h"

namespace chorus {
namespace {

constexpr int kMaxConvChannels = 4096;
constexpr int kMaxConvKernel = 15;
constexpr int kMaxImageSide = 65536;

// Where pixel (sample, channel, y, x) of a stage's input lies, in floats.
struct InputStrides {
  int64_t sample, channel, y, x;
};

InputStrides StridesOf(const ConvFront::Stage& g, bool channel_major) {
  const int64_t c = g.in_channels, h = g.height, w = g.width;
  if (channel_major) return {c * h * w, h * w, w, 1};
  return {h * w * c, 1, w * c, c};
}

// Copies n floats. GCC makes a memmove call of this loop; masked AVX-512 moves in its place
// measured no faster, the unfolding being bound by its stores (BENCHMARKS.md).
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

// Whether this CPU runs the passes below compiled for AVX-512 (each has a baseline x86-64 twin;
// both give the same bits, as the passes only move, compare and add element by element).
bool Avx512Passes() {
  static const bool available = __builtin_cpu_supports("avx512f");
  return available;
}

// Unfolds `samples` samples of `in` into columns: row (i H + y) W + x, column (dy k + dx) C + c
// holds input channel c at (y + dy - pad, x + dx - pad) of sample i, or 0 outside the image.
// When a pixel's channels sit just before the next pixel's (channels last, or one channel), each
// kernel row's taps inside the image are one run of the input, copied whole.
[[gnu::always_inline]] inline void UnfoldBody(const float* in, int64_t samples, const ConvFront::Stage& g,
                                              const InputStrides& st, float* columns) {
  const int k = g.kernel, c_in = g.in_channels;
  const int64_t span = int64_t{k} * c_in;
  const bool runs = st.x == c_in && (c_in == 1 || st.channel == 1);
  float* dst = columns;
  for (int64_t i = 0; i < samples; ++i) {
    const float* sample = in + i * st.sample;
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
          const float* src = sample + iy * st.y + (x + taps.lo - g.pad) * st.x;
          if (runs) {
            CopyRun(src, int64_t{taps.hi - taps.lo} * c_in, dst + int64_t{taps.lo} * c_in);
            continue;
          }
          for (int dx = taps.lo; dx < taps.hi; ++dx, src += st.x) {
            for (int c = 0; c < c_in; ++c) dst[int64_t{dx} * c_in + c] = src[c * st.channel];
          }
        }
      }
    }
  }
}

__attribute__((target("avx512f"))) void UnfoldAvx512(const float* in, int64_t samples, const ConvFront::Stage& g,
                                                     const InputStrides& st, float* columns) {
  UnfoldBody(in, samples, g, st, columns);
}

void Unfold(const float* in, int64_t samples, const ConvFront::Stage& g, const InputStrides& st,
            float* columns) {
  if (Avx512Passes()) return UnfoldAvx512(in, samples, g, st, columns);
  UnfoldBody(in, samples, g, st, columns);
}

// The adjoint of Unfold for a channels-last input: adds each column entry back onto the input
// pixel it was copied from, in column order. `in_grad` (samples H W C floats) is overwritten.
[[gnu::always_inline]] inline void FoldBody(const float* columns, int64_t samples, const ConvFront::Stage& g,
                                            float* in_grad) {
  const int k = g.kernel, c_in = g.in_channels;
  const int64_t span = int64_t{k} * c_in;
  const InputStrides st = StridesOf(g, false);
  std::fill(in_grad, in_grad + samples * st.sample, 0.0f);
  const float* src = columns;
  for (int64_t i = 0; i < samples; ++i) {
    float* sample = in_grad + i * st.sample;
    for (int y = 0; y < g.height; ++y) {
      for (int x = 0; x < g.width; ++x) {
        const TapRange taps = TapsInside(x, g);
        for (int dy = 0; dy < k; ++dy, src += span) {
          const int iy = y + dy - g.pad;
          if (iy < 0 || iy >= g.height) continue;
          AddRun(src + int64_t{taps.lo} * c_in, int64_t{taps.hi - taps.lo} * c_in,
                 sample + iy * st.y + (x + taps.lo - g.pad) * st.x);
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
// in order (0,0), (0,1), (1,0), (1,1). Distinct rows, hence restrict: the loop vectorises.
template <typename Act>
[[gnu::always_inline]] inline void PoolWindow(const Act act, Pooling pool, int64_t c, const float* __restrict bias,
                                              float* __restrict z0, float* __restrict z1, float* __restrict z2,
                                              float* __restrict z3, float* __restrict dst, uint8_t* __restrict best) {
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
  for (int64_t j = 0; j < c; ++j) {
    z0[j] += bias[j];
    z1[j] += bias[j];
    z2[j] += bias[j];
    z3[j] += bias[j];
    const float a0 = act(z0[j]), a1 = act(z1[j]), a2 = act(z2[j]), a3 = act(z3[j]);
    // As a tree, with selects the compiler vectorises; the same winner as a scan in window order
    // in which a later value wins only if greater.
    const float top = a1 > a0 ? a1 : a0, bottom = a3 > a2 ? a3 : a2;
    dst[j] = bottom > top ? bottom : top;
    const int32_t right_top = a1 > a0, right_bottom = a3 > a2, in_bottom = bottom > top;
    best[j] = static_cast<uint8_t>(2 * in_bottom + (in_bottom & right_bottom) + ((1 - in_bottom) & right_top));
  }
}

// For a pooled stage, in one pass over the pre-activations z (channels-last (rows H W) x C): adds
// the bias to z, applies the activation and pools 2 x 2 at stride 2 into `pooled`. Max keeps the
// first of equal values in window order (0,0), (0,1), (1,0), (1,1), as PyTorch does, and records
// it in `argmax`; average is ((a0 + a1) + a2) + a3 over 4. The activations themselves are never
// stored: backward needs only z and the winners.
template <typename Act>
[[gnu::always_inline]] inline void BiasActivateAndPoolBody(const Act act, const ConvFront::Stage& g, int64_t samples,
                                                           const float* bias, Matrix& z, Matrix& pooled,
                                                           std::vector<uint8_t>& argmax) {
  const int64_t c = g.out_channels;
  ForEachWindow(g, samples, [&](int64_t top, int64_t out_row) {
    uint8_t* best = g.pool == Pooling::kMax ? argmax.data() + out_row * c : nullptr;
    PoolWindow(act, g.pool, c, bias, z.row(top).data(), z.row(top + 1).data(), z.row(top + g.width).data(),
               z.row(top + g.width + 1).data(), pooled.row(out_row).data(), best);
  });
  ForEachUnpooledPixel(g, samples, [&](int64_t row) {
    for (int64_t j = 0; j < c; ++j) z(row, j) += bias[j];
  });
}

template <typename Act>
__attribute__((target("avx512f"))) void BiasActivateAndPoolAvx512(const Act act, const ConvFront::Stage& g,
                                                                  int64_t samples, const float* bias, Matrix& z,
                                                                  Matrix& pooled, std::vector<uint8_t>& argmax) {
  BiasActivateAndPoolBody(act, g, samples, bias, z, pooled, argmax);
}

void BiasActivateAndPool(Activation activation, const ConvFront::Stage& g, int64_t samples, const float* bias,
                         Matrix& z, Matrix& pooled, std::vector<uint8_t>& argmax) {
  WithActivation(activation, [&](const auto act) {
    if (Avx512Passes()) return BiasActivateAndPoolAvx512(act, g, samples, bias, z, pooled, argmax);
    BiasActivateAndPoolBody(act, g, samples, bias, z, pooled, argmax);
  });
}

template <typename Act>
[[gnu::always_inline]] inline void UnpoolWindow(const Act act, Pooling pool, int64_t c, const float* __restrict src,
                                                const uint8_t* __restrict best, const float* __restrict z,
                                                float* __restrict dst, int32_t p) {
  if (pool == Pooling::kAverage) {
    for (int64_t j = 0; j < c; ++j) dst[j] = act.Backward(0.25f * src[j], z[j]);
    return;
  }
  for (int64_t j = 0; j < c; ++j) {
    const int32_t winner = best[j];  // widened first, or the loop does not vectorise
    dst[j] = act.Backward(winner == p ? src[j] : 0.0f, z[j]);
  }
}

// The adjoint of BiasActivateAndPool, in one pass: from dL/d(pooled) and z, writes dL/dz into
// `grad` (same shape as z). A window's gradient goes to its winner (max) or a quarter to each
// pixel (average), times the activation's derivative; pixels in no window get 0.
template <typename Act>
[[gnu::always_inline]] inline void UnpoolThroughActivationBody(const Act act, const ConvFront::Stage& g,
                                                               int64_t samples, const Matrix& pooled_grad,
                                                               const std::vector<uint8_t>& argmax, const Matrix& z,
                                                               Matrix& grad) {
  const int64_t c = g.out_channels;
  ForEachWindow(g, samples, [&](int64_t top, int64_t out_row) {
    const int64_t rows[4] = {top, top + 1, top + g.width, top + g.width + 1};
    const uint8_t* best = g.pool == Pooling::kMax ? argmax.data() + out_row * c : nullptr;
    for (int32_t p = 0; p < 4; ++p) {
      UnpoolWindow(act, g.pool, c, pooled_grad.row(out_row).data(), best, z.row(rows[p]).data(),
                   grad.row(rows[p]).data(), p);
    }
  });
  ForEachUnpooledPixel(g, samples, [&](int64_t row) {
    for (int64_t j = 0; j < c; ++j) grad(row, j) = act.Backward(0.0f, z(row, j));
  });
}

template <typename Act>
__attribute__((target("avx512f"))) void UnpoolThroughActivationAvx512(const Act act, const ConvFront::Stage& g,
                                                                      int64_t samples, const Matrix& pooled_grad,
                                                                      const std::vector<uint8_t>& argmax,
                                                                      const Matrix& z, Matrix& grad) {
  UnpoolThroughActivationBody(act, g, samples, pooled_grad, argmax, z, grad);
}

void UnpoolThroughActivation(Activation activation, const ConvFront::Stage& g, int64_t samples,
                             const Matrix& pooled_grad, const std::vector<uint8_t>& argmax, const Matrix& z,
                             Matrix& grad) {
  WithActivation(activation, [&](const auto act) {
    if (Avx512Passes()) return UnpoolThroughActivationAvx512(act, g, samples, pooled_grad, argmax, z, grad);
    UnpoolThroughActivationBody(act, g, samples, pooled_grad, argmax, z, grad);
  });
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

ConvFront::Workspace ConvFront::MakeWorkspace(int64_t max_rows, int64_t kept_columns_bytes) const {
  Workspace ws;
  int64_t column_floats = 0, kept_floats = 0;
  for (const Stage& g : stages_) {
    const bool pooled = g.pool != Pooling::kNone;
    ws.pre.emplace_back(max_rows * g.Pixels(), g.out_channels);
    ws.post.emplace_back(pooled ? 0 : max_rows * g.Pixels(), g.out_channels);
    ws.grad.emplace_back(max_rows * g.Pixels(), g.out_channels);
    ws.pooled.emplace_back(pooled ? max_rows * g.OutPixels() : 0, g.out_channels);
    ws.grad_pooled.emplace_back(pooled ? max_rows * g.OutPixels() : 0, g.out_channels);
    ws.argmax.emplace_back(g.pool == Pooling::kMax ? max_rows * g.OutPixels() * g.out_channels : 0);
    column_floats = std::max(column_floats, g.Pixels() * g.KernelRows());
    kept_floats += max_rows * g.Pixels() * g.KernelRows();
  }
  const int64_t chunk = std::min(max_rows, kChunkSamples);
  if (kept_floats * int64_t{sizeof(float)} <= kept_columns_bytes) {
    for (const Stage& g : stages_) ws.kept_columns.emplace_back(max_rows * g.Pixels(), g.KernelRows());
  } else {
    ws.columns.resize(chunk * column_floats, 1);
  }
  ws.column_grad.resize(chunk * column_floats, 1);
  return ws;
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
    const InputStrides st = StridesOf(g, s == 0);
    const float* in = StageInput(s, x, ws);
    Eigen::Map<const Matrix> kernel(params + WeightOffset(s), g.KernelRows(), g.out_channels);
    if (!ws.kept_columns.empty()) {
      auto columns = ws.kept_columns[s].topRows(rows * g.Pixels());
      Unfold(in, rows, g, st, columns.data());
      Gemm(Transpose::kNo, Transpose::kNo, 1.0f, columns, kernel, 0.0f, ws.pre[s].topRows(rows * g.Pixels()),
           ws.products);
    }
    for (int64_t i0 = 0; ws.kept_columns.empty() && i0 < rows; i0 += kChunkSamples) {
      const int64_t n = std::min(kChunkSamples, rows - i0);
      Eigen::Map<Matrix> columns(ws.columns.data(), n * g.Pixels(), g.KernelRows());
      Unfold(in + i0 * st.sample, n, g, st, columns.data());
      Gemm(Transpose::kNo, Transpose::kNo, 1.0f, columns, kernel, 0.0f,
           ws.pre[s].middleRows(i0 * g.Pixels(), n * g.Pixels()), ws.products);
    }
    if (g.pool != Pooling::kNone) {
      BiasActivateAndPool(activation_, g, rows, params + BiasOffset(s), ws.pre[s], ws.pooled[s], ws.argmax[s]);
      continue;
    }
    AddBiasAndActivate(activation_, params + BiasOffset(s), ws.pre[s].topRows(rows * g.Pixels()),
                       ws.post[s].topRows(rows * g.Pixels()));
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
    auto dz = ws.grad[s].topRows(rows * g.Pixels());
    if (g.pool != Pooling::kNone) {
      UnpoolThroughActivation(activation_, g, rows, ws.grad_pooled[s], ws.argmax[s], ws.pre[s], ws.grad[s]);
    } else {
      MultiplyActivationDerivative(activation_, ws.pre[s].topRows(rows * g.Pixels()), dz);
    }
    // dK = columns^T dZ (summed over chunks when they are not kept); db = 1^T dZ; for s > 0
    // also dL/d(input) = Fold(dZ K^T), taken before K is updated.
    const InputStrides st = StridesOf(g, s == 0);
    const float* in = StageInput(s, x, ws);
    Eigen::Map<const Matrix> kernel(params + WeightOffset(s), g.KernelRows(), g.out_channels);
    Eigen::Map<Matrix> dkernel(grad + WeightOffset(s), g.KernelRows(), g.out_channels);
    const bool kept = !ws.kept_columns.empty();
    if (kept) Gemm(Transpose::kYes, Transpose::kNo, 1.0f, ws.kept_columns[s].topRows(rows * g.Pixels()), dz, 0.0f, dkernel,
                     ws.products);
    for (int64_t i0 = 0; i0 < rows && (s > 0 || !kept); i0 += kChunkSamples) {
      const int64_t n = std::min(kChunkSamples, rows - i0);
      const auto dz_chunk = dz.middleRows(i0 * g.Pixels(), n * g.Pixels());
      if (!kept) {
        Eigen::Map<Matrix> columns(ws.columns.data(), n * g.Pixels(), g.KernelRows());
        Unfold(in + i0 * st.sample, n, g, st, columns.data());
        Gemm(Transpose::kYes, Transpose::kNo, 1.0f, columns, dz_chunk, i0 == 0 ? 0.0f : 1.0f, dkernel,
             ws.products);
      }
      if (s == 0) continue;
      Eigen::Map<Matrix> column_grad(ws.column_grad.data(), n * g.Pixels(), g.KernelRows());
      Gemm(Transpose::kNo, Transpose::kYes, 1.0f, dz_chunk, kernel, 0.0f, column_grad, ws.products);
      const Stage& prev = stages_[s - 1];
      Fold(column_grad.data(), n, g,
           StageOutputGradient(s - 1, ws).row(i0 * prev.OutPixels()).data());
    }
    Eigen::Map<Eigen::RowVectorXf>(grad + BiasOffset(s), g.out_channels) = dz.colwise().sum();
    if (optimizer != nullptr) {
      const int64_t block = (g.KernelRows() + 1) * g.out_channels;
      SgdStep(*optimizer, lr, block, grad + WeightOffset(s), params + WeightOffset(s), velocity + WeightOffset(s));
    }
  }
}

}  // namespace chorus

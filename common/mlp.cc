#include "common/mlp.h"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "common/activation.h"
#include "common/gemm.h"
#include "common/rng.h"
#include "common/sgd.h"

namespace chorus {
namespace {

// Element-wise passes over fewer entries stay on one thread (about 10 microseconds of work).
constexpr int64_t kMinSplitEntries = 32 * 1024;

// fn(first_row, rows) over blocks of [0, rows) that together cover it, one block per thread of
// `parallel`; one block when the pass is small.
template <typename Fn>
void ForRowBlocks(const ParallelFor* parallel, int64_t rows, int64_t cols, Fn&& fn) {
  const int64_t blocks = rows * cols < kMinSplitEntries ? 1 : std::min<int64_t>(ThreadsOf(parallel), rows);
  if (blocks <= 1) {
    fn(int64_t{0}, rows);
    return;
  }
  ParallelForEach(parallel, blocks, [&](int64_t i) {
    const int64_t first = i * rows / blocks;
    fn(first, (i + 1) * rows / blocks - first);
  });
}

}  // namespace

Mlp::Mlp(std::vector<int> widths, Activation activation, ConvFront front)
    : widths_(std::move(widths)), activation_(activation), front_(std::move(front)),
      parameter_count_(front_.ParameterCount()) {
  assert(widths_.size() >= 2 && (front_.empty() || widths_.front() == front_.Outputs()));
  for (size_t l = 0; l + 1 < widths_.size(); ++l) {
    offsets_.push_back(parameter_count_);
    parameter_count_ += int64_t{widths_[l]} * widths_[l + 1] + widths_[l + 1];
  }
}

Mlp::Workspace Mlp::MakeWorkspace(int64_t max_rows, ProductPrecision products) const {
  Workspace ws;
  ws.products = products;
  for (int l = 0; l < layers(); ++l) {
    ws.pre.emplace_back(max_rows, widths_[l + 1]);
    ws.grad.emplace_back(max_rows, widths_[l + 1]);
    if (l + 1 < layers()) ws.post.emplace_back(max_rows, widths_[l + 1]);
  }
  ws.front = front_.MakeWorkspace(max_rows);
  ws.front.products = products;
  return ws;
}

void Mlp::Initialize(uint64_t seed, float* params) const {
  Philox rng(seed);
  front_.Initialize(rng, params);
  for (int l = 0; l < layers(); ++l) {
    const bool hidden = l + 1 < layers();
    const double gain2 = hidden && activation_ != Activation::kTanh ? 2.0 : 1.0;
    const double sd = std::sqrt(gain2 / widths_[l]);
    const int64_t n_w = int64_t{widths_[l]} * widths_[l + 1];
    float* w = params + WeightOffset(l);
    for (int64_t i = 0; i < n_w; ++i) w[i] = static_cast<float>(sd * rng.NextNormal());
    std::fill(params + BiasOffset(l), params + BiasOffset(l) + widths_[l + 1], 0.0f);
  }
}

ConstMatrixRef Mlp::DenseInput(int l, const ConstMatrixRef& x, const Workspace& ws) const {
  const int64_t rows = x.rows();
  if (l > 0) return ws.post[l - 1].topRows(rows);
  if (front_.empty()) return x;
  // The front's output: its last stage's activations, pooled or not.
  const int last = static_cast<int>(front_.stages().size()) - 1;
  const Matrix& out = front_.stages().back().pool == Pooling::kNone ? ws.front.post[last] : ws.front.pooled[last];
  return Eigen::Map<const Matrix>(out.data(), rows, widths_.front());
}

ConstMatrixRef Mlp::LastLayerInput(const ConstMatrixRef& x, const Workspace& ws) const {
  return DenseInput(layers() - 1, x, ws);
}

MatrixRef Mlp::Forward(const float* params, const ConstMatrixRef& x, Workspace& ws,
                       const ParallelFor* parallel) const {
  const int64_t rows = x.rows();
  if (!front_.empty()) front_.Forward(params, x, ws.front);
  for (int l = 0; l < layers(); ++l) {
    Eigen::Map<const Matrix> w(params + WeightOffset(l), widths_[l], widths_[l + 1]);
    Eigen::Map<const Eigen::RowVectorXf> b(params + BiasOffset(l), widths_[l + 1]);
    auto z = ws.pre[l].topRows(rows);
    // Z_l = H_{l-1} W_l + 1 b^T, then H_l = act(Z_l) in the same pass as the bias
    const ConstMatrixRef input = DenseInput(l, x, ws);
    GemmAcross(parallel, Transpose::kNo, Transpose::kNo, 1.0f, input, w, 0.0f, z, ws.products);
    if (l + 1 < layers()) {
      auto h = ws.post[l].topRows(rows);
      ForRowBlocks(parallel, rows, z.cols(), [&](int64_t first, int64_t count) {
        AddBiasAndActivate(activation_, params + BiasOffset(l), z.middleRows(first, count),
                           h.middleRows(first, count));
      });
    } else {
      z.rowwise() += b;
    }
  }
  return ws.pre.back().topRows(rows);
}

void Mlp::Backward(const float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                   Workspace& ws, float* grad, const ParallelFor* parallel) const {
  // Without an optimizer nothing writes through the pointer.
  BackwardImpl(const_cast<float*>(params), x, grad_output, ws, grad, nullptr, 0.0f, nullptr, parallel);
}

void Mlp::BackwardWithSgd(float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                          Workspace& ws, float* grad, const OptimizerConfig& optimizer, float lr,
                          float* velocity, const ParallelFor* parallel) const {
  BackwardImpl(params, x, grad_output, ws, grad, &optimizer, lr, velocity, parallel);
}

void Mlp::BackwardImpl(float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                       Workspace& ws, float* grad, const OptimizerConfig* optimizer, float lr,
                       float* velocity, const ParallelFor* parallel) const {
  const int64_t rows = x.rows();
  ws.grad.back().topRows(rows) = grad_output;
  for (int l = layers() - 1; l >= 0; --l) {
    auto dz = ws.grad[l].topRows(rows);
    Eigen::Map<Matrix> dw(grad + WeightOffset(l), widths_[l], widths_[l + 1]);
    Eigen::Map<Eigen::RowVectorXf> db(grad + BiasOffset(l), widths_[l + 1]);
    if (l > 0) {
      // dZ_{l-1} = (dZ_l W_l^T) * act'(Z_{l-1}), before W_l is updated.
      Eigen::Map<const Matrix> w(params + WeightOffset(l), widths_[l], widths_[l + 1]);
      auto dprev = ws.grad[l - 1].topRows(rows);
      GemmAcross(parallel, Transpose::kNo, Transpose::kYes, 1.0f, dz, w, 0.0f, dprev, ws.products);
      const auto z = ws.pre[l - 1].topRows(rows);
      ForRowBlocks(parallel, rows, dprev.cols(), [&](int64_t first, int64_t count) {
        MultiplyActivationDerivative(activation_, z.middleRows(first, count), dprev.middleRows(first, count));
      });
    } else if (!front_.empty()) {
      // dL/d(front output) = dZ_0 W_0^T, before W_0 is updated.
      Eigen::Map<const Matrix> w(params + WeightOffset(0), widths_[0], widths_[1]);
      GemmAcross(parallel, Transpose::kNo, Transpose::kYes, 1.0f, dz, w, 0.0f,
                 front_.OutputGradient(ws.front, rows), ws.products);
    }
    // dW_l = H_{l-1}^T dZ_l ; db_l = 1^T dZ_l
    const ConstMatrixRef input = DenseInput(l, x, ws);
    db = dz.colwise().sum();
    if (optimizer == nullptr) {
      GemmAcross(parallel, Transpose::kYes, Transpose::kNo, 1.0f, input, dz, 0.0f, dw, ws.products);
      continue;
    }
    const SgdUpdate update{params + WeightOffset(l), velocity + WeightOffset(l), widths_[l + 1], lr,
                           static_cast<float>(optimizer->momentum),
                           static_cast<float>(optimizer->weight_decay), optimizer->nesterov};
    GemmSgdUpdateAcross(parallel, Transpose::kYes, Transpose::kNo, 1.0f, input, dz, update, dw,
                        ws.products);
    SgdStep(*optimizer, lr, widths_[l + 1], grad + BiasOffset(l), params + BiasOffset(l),
            velocity + BiasOffset(l));
  }
  if (!front_.empty()) front_.Backward(params, x, ws.front, grad, optimizer, lr, velocity);
}

void AddBiasAndActivate(Activation a, const float* bias, Eigen::Ref<Matrix> z, Eigen::Ref<Matrix> h) {
  WithActivation(a, [&](const auto act) {
    const int64_t cols = z.cols();
    for (int64_t i = 0; i < z.rows(); ++i) {
      float* zr = z.row(i).data();
      float* hr = h.row(i).data();
      for (int64_t j = 0; j < cols; ++j) {
        const float v = zr[j] + bias[j];
        zr[j] = v;
        hr[j] = act(v);
      }
    }
  });
}

void MultiplyActivationDerivative(Activation a, const Eigen::Ref<const Matrix>& z,
                                  Eigen::Ref<Matrix> dh) {
  WithActivation(a, [&](const auto act) {
    dh = dh.binaryExpr(z, [&act](float g, float v) { return act.Backward(g, v); });
  });
}

}  // namespace chorus

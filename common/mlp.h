// A network over a flat parameter vector, with forward and backward passes: an optional
// convolutional front (common/conv_front.h) followed by dense layers (a multi-layer perceptron).
// Dense layer l maps width[l] -> width[l+1]: Z_l = H_{l-1} W_l + 1 b_l^T, H_l = act(Z_l) for
// hidden layers, H_{-1} = the input (or the front's output); the last layer is linear (its Z is
// the network output: logits, or mean/log-variance).
// Parameter layout (float32): the front's block, then for each dense layer in order, W_l
// (width[l] x width[l+1], row-major) then b_l (width[l+1]).
// Threads: Forward and Backward may cut the dense layers' products and element-wise passes into
// blocks of whole rows or columns run through a ParallelFor (null: on the calling thread); the
// bits do not depend on it. The convolutional front runs on the calling thread.
// Thread safety: an Mlp is immutable and shareable; a Workspace belongs to one call at a time.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/conv_front.h"
#include "common/matrix.h"
#include "common/parallel_for.h"

namespace chorus {

class Mlp {
 public:
  // widths = {dense inputs, hidden..., outputs}, each >= 1, at least two entries; the dense
  // inputs are the network's inputs, or with a front, its Outputs().
  Mlp(std::vector<int> widths, Activation activation, ConvFront front = ConvFront());

  int64_t ParameterCount() const { return parameter_count_; }
  int layers() const { return static_cast<int>(widths_.size()) - 1; }  // dense layers
  const std::vector<int>& widths() const { return widths_; }
  const ConvFront& front() const { return front_; }
  int64_t Inputs() const { return front_.empty() ? widths_.front() : front_.Inputs(); }
  Activation activation() const { return activation_; }
  int64_t WeightOffset(int layer) const { return offsets_[layer]; }
  int64_t BiasOffset(int layer) const { return offsets_[layer] + int64_t{widths_[layer]} * widths_[layer + 1]; }

  // Activations kept for backward, sized for up to max_rows inputs. Allocated once; Forward and
  // Backward on at most max_rows rows allocate nothing.
  struct Workspace {
    std::vector<Matrix> pre;   // Z_l, max_rows x width[l+1], one per layer
    std::vector<Matrix> post;  // H_l = act(Z_l), one per hidden layer
    std::vector<Matrix> grad;  // dL/dZ_l scratch, one per layer
    ConvFront::Workspace front;
    ProductPrecision products = ProductPrecision::kFp32;  // of every product, front included
  };
  Workspace MakeWorkspace(int64_t max_rows,
                          ProductPrecision products = ProductPrecision::kFp32) const;

  // Writes N(0, gain^2 / fan_in) weights (gain^2 = 2 for relu/gelu hidden layers, 1 for tanh and
  // for the output layer; He et al., ICCV 2015) and zero biases, drawn from Philox(seed).
  void Initialize(uint64_t seed, float* params) const;

  // Runs x (rows x Inputs(), rows <= max_rows) forward; returns a view of the output Z_L
  // (rows x outputs) inside `ws`, valid until the next call with the same workspace.
  MatrixRef Forward(const float* params, const ConstMatrixRef& x, Workspace& ws,
                    const ParallelFor* parallel = nullptr) const;

  // The input of the last dense layer after Forward on `ws` (rows x widths()[layers() - 1]): the
  // last hidden activation, the front's output, or x itself.
  ConstMatrixRef LastLayerInput(const ConstMatrixRef& x, const Workspace& ws) const;

  // Given dL/dZ_L (rows x outputs, same rows as the last Forward on `ws`), writes dL/dparams into
  // grad (ParameterCount() floats, overwritten).
  void Backward(const float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                Workspace& ws, float* grad, const ParallelFor* parallel = nullptr) const;

  // Backward with the SGD step (common/sgd.h, at rate lr, no clipping) fused in: each layer's
  // weights and biases are updated as soon as their gradient is known, after they have served the
  // gradient of the layer below; the weight gradient is never written out (common/gemm.h,
  // GemmSgdUpdate). Same bits as Backward followed by SgdStep. grad: ParameterCount floats of
  // scratch; velocity: the momentum, Mlp layout.
  void BackwardWithSgd(float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                       Workspace& ws, float* grad, const OptimizerConfig& optimizer, float lr,
                       float* velocity, const ParallelFor* parallel = nullptr) const;

 private:
  // Backward, and with optimizer non-null the fused update of BackwardWithSgd.
  void BackwardImpl(float* params, const ConstMatrixRef& x, const ConstMatrixRef& grad_output,
                    Workspace& ws, float* grad, const OptimizerConfig* optimizer, float lr,
                    float* velocity, const ParallelFor* parallel) const;

  // The input of dense layer l: x, the front's output or H_{l-1}.
  ConstMatrixRef DenseInput(int l, const ConstMatrixRef& x, const Workspace& ws) const;

  std::vector<int> widths_;
  Activation activation_;
  ConvFront front_;
  std::vector<int64_t> offsets_;
  int64_t parameter_count_ = 0;
};

// Element-wise activation kernels (the functions: common/activation.h).
// z <- z + 1 bias^T and h <- act(z), in one pass over z (bias: z.cols() floats; h shaped as z).
void AddBiasAndActivate(Activation a, const float* bias, Eigen::Ref<Matrix> z, Eigen::Ref<Matrix> h);
// dh <- dh * act'(z), in place.
void MultiplyActivationDerivative(Activation a, const Eigen::Ref<const Matrix>& z, Eigen::Ref<Matrix> dh);

}  // namespace chorus

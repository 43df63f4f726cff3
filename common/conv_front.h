// The convolutional front of a network (common/mlp.h): stages of convolution, bias, activation
// and pooling that turn an image row into the features the dense layers see.
// Stage s maps C_s x H_s x W_s to C_{s+1} x H_s x W_s by a k x k convolution at stride 1 with
// k / 2 zero padding, adds the bias, applies the activation, then pools 2 x 2 at stride 2 (max
// or mean; odd edges dropped, as PyTorch's floor mode) or not at all.
// Layouts: the input row is channel-major (ImageShape); inside, activations are channels-last
// matrices with one row per pixel ((sample * H + y) * W + x) and one column per channel, so each
// convolution is one GEMM of the unfolded input (im2col) by the kernel. The front's output row is
// therefore height x width x channels (channels fastest), and so is the first dense layer's
// weight row order.
// Parameters (float32, one block): for each stage, the kernel as a (k k C_s) x C_{s+1} row-major
// matrix whose row (dy k + dx) C_s + c is input channel c at offset (dy, dx), then the bias.
// Forward and Backward run each stage over chunks of samples (Workspace::chunk_samples), sized
// so that a chunk's unfolded input and pre-activations stay in a core's L2 cache: unfold, product,
// then bias, activation and pooling (forward); the pooling's adjoint, the unfolding again, the
// kernel gradient's share and the input gradient (backward). Only the stages' outputs, the
// pooling winners and their pre-activations (max) or all pre-activations (otherwise) span the
// batch. A sample's outputs depend only on it and the parameters; the parameter gradients add
// the chunks' shares in order, so their bits depend on the batch and the chunk size.
// Thread safety: a ConvFront is immutable and shareable; a Workspace belongs to one thread.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/matrix.h"
#include "common/rng.h"
#include "common/sgd.h"

namespace chorus {

class ConvFront {
 public:
  static constexpr int64_t kChunkBytes = int64_t{384} << 10;  // unfolded input + pre-activations

  // The geometry of one stage.
  struct Stage {
    int in_channels, height, width;  // the stage's input
    int out_channels, kernel, pad;
    Pooling pool;
    int out_height, out_width;       // after pooling
    int64_t KernelRows() const { return int64_t{kernel} * kernel * in_channels; }
    int64_t Pixels() const { return int64_t{height} * width; }
    int64_t OutPixels() const { return int64_t{out_height} * out_width; }
  };

  ConvFront() = default;  // no stages
  // Requires every stage valid for `input` (CheckConvStages); asserts otherwise.
  ConvFront(ImageShape input, const std::vector<ConvStage>& stages, Activation activation);

  bool empty() const { return stages_.empty(); }
  const ImageShape& input() const { return input_; }
  const std::vector<Stage>& stages() const { return stages_; }
  int64_t Inputs() const { return input_.size(); }
  int64_t Outputs() const;  // features of the last stage's output row
  int64_t ParameterCount() const { return parameter_count_; }
  int64_t WeightOffset(int s) const { return offsets_[s]; }
  int64_t BiasOffset(int s) const { return offsets_[s] + stages_[s].KernelRows() * stages_[s].out_channels; }

  // Activations kept for backward, for up to max_rows samples. Forward and Backward on at most
  // max_rows rows allocate nothing.
  struct Workspace {
    std::vector<Matrix> pre;      // per stage: pre-activation, (rows H W) x C_out; one chunk's if max-pooled
    std::vector<Matrix> post;     // per unpooled stage: activation, same shape; else empty
    std::vector<Matrix> pooled;   // per pooled stage: (rows H' W') x C_out; else empty
    std::vector<std::vector<uint8_t>> argmax;  // per max-pooled stage: winner in its 2 x 2 window
    std::vector<Matrix> argmax_z;  // per max-pooled stage: the winner's pre-activation, shaped as pooled
    std::vector<Matrix> grad;     // per unpooled stage: dL/d(post), then dL/d(pre) in place; else empty
    std::vector<Matrix> grad_pooled;  // per pooled stage: dL/d(pooled)
    std::vector<int64_t> chunk_samples;  // per stage: samples per chunk
    Matrix columns;               // one chunk's unfolded input, then its gradient
    Matrix chunk_grad;            // dL/d(pre) of one chunk of a pooled stage
    ProductPrecision products = ProductPrecision::kFp32;  // of the stages' products
  };
  // chunk_bytes: sizes the chunks (tests pass a small one to run many chunks on small images).
  Workspace MakeWorkspace(int64_t max_rows, int64_t chunk_bytes = kChunkBytes) const;
  // The floats MakeWorkspace(max_rows, chunk_bytes) holds (the winners' bytes rounded up to
  // whole floats per stage), without allocating them: for the run's memory estimate.
  int64_t WorkspaceFloats(int64_t max_rows, int64_t chunk_bytes = kChunkBytes) const;

  // N(0, gain^2 / (k k C_s)) kernels (gain^2 = 2 for relu/gelu, 1 for tanh; He et al. 2015) and
  // zero biases, drawn in parameter order from rng.
  void Initialize(Philox& rng, float* params) const;

  // x: rows x Inputs(), rows <= max_rows. Returns the output, rows x Outputs(), inside `ws`.
  Eigen::Map<const Matrix> Forward(const float* params, const ConstMatrixRef& x, Workspace& ws) const;

  // Where the caller writes dL/d(output) (rows x Outputs()) after Forward on the same rows.
  Eigen::Map<Matrix> OutputGradient(Workspace& ws, int64_t rows) const;

  // From dL/d(output) in OutputGradient, writes dL/d(front parameters) into grad. With optimizer
  // non-null, also takes each stage's SGD step (common/sgd.h, at rate lr, on params and velocity)
  // as soon as its gradient is complete; the input's gradient is never formed.
  void Backward(float* params, const ConstMatrixRef& x, Workspace& ws, float* grad,
                const OptimizerConfig* optimizer, float lr, float* velocity) const;

 private:
  // Input of stage s: x for s = 0 (channel-major rows), else stage s - 1's output.
  const float* StageInput(int s, const ConstMatrixRef& x, const Workspace& ws) const;
  Matrix& StageOutputGradient(int s, Workspace& ws) const;

  ImageShape input_;
  Activation activation_ = Activation::kRelu;
  std::vector<Stage> stages_;
  std::vector<int64_t> offsets_;
  int64_t parameter_count_ = 0;
};

// Checks stages against an input shape: 1 to kMaxConvStages stages, channels in [1, 4096], odd
// kernels in [1, 15], every pooled stage's input at least 2 x 2, image dimensions in [1, 65536].
// Empty string when valid, else what is wrong ("stage 2: ...").
std::string CheckConvStages(const ImageShape& input, const std::vector<ConvStage>& stages);

// Parameters of the front, or -1 if CheckConvStages fails.
int64_t ConvParameterCount(const ImageShape& input, const std::vector<ConvStage>& stages);

// For tests: true runs the fronts' element-wise passes (unfolding, folding, pooling and their
// adjoints) in their baseline x86-64 form even where the CPU has AVX-512; false restores the
// CPU's choice. Takes effect for passes started after the call, in every thread.
void ForceBaselineConvPasses(bool baseline);

}  // namespace chorus

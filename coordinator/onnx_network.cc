#include "coordinator/onnx_network.h"

#include <cstdint>
#include <vector>

#include "common/activation.h"

namespace chorus {
namespace onnx_network_detail {

// h = act(z): Relu, Tanh, or GELU as z * (0.5 * (1 + Erf(z / sqrt 2))), the exact form and
// evaluation order of common/activation.h (ONNX has no GELU operator before opset 20).
std::string Activate(OnnxGraphBuilder& g, Activation a, const std::string& z) {
  switch (a) {
    case Activation::kRelu: return g.Node("Relu", {z});
    case Activation::kTanh: return g.Node("Tanh", {z});
    case Activation::kGelu: break;
  }
  const float inv_sqrt2 = GeluFunction::kInvSqrt2, one = 1.0f, half = 0.5f;
  const std::string scaled = g.Node("Mul", {z, g.FloatConstant("inv_sqrt2", {}, &inv_sqrt2)});
  const std::string plus_one = g.Node("Add", {g.Node("Erf", {scaled}), g.FloatConstant("one", {}, &one)});
  const std::string cdf = g.Node("Mul", {plus_one, g.FloatConstant("half", {}, &half)});
  return g.Node("Mul", {z, cdf});
}

// Stage s's kernel as ONNX Conv weights [C_out, C_in, k, k] (cross-correlation, as chorus's
// unfolding reads input (y + dy - pad, x + dx - pad)) from chorus's (k k C_in) x C_out row-major
// matrix whose row (dy k + dx) C_in + c is input channel c at offset (dy, dx).
std::vector<float> ConvWeights(const ConvFront::Stage& st, const float* kernel) {
  const int k = st.kernel, c_in = st.in_channels, c_out = st.out_channels;
  std::vector<float> w(static_cast<size_t>(st.KernelRows() * c_out));
  size_t i = 0;
  for (int m = 0; m < c_out; ++m) {
    for (int c = 0; c < c_in; ++c) {
      for (int dy = 0; dy < k; ++dy) {
        for (int dx = 0; dx < k; ++dx) {
          w[i++] = kernel[((int64_t{dy} * k + dx) * c_in + c) * c_out + m];
        }
      }
    }
  }
  return w;
}

// The front: x [N, C H W] -> [N, C, H, W] -> stages -> channels-last [N, H' W' C'].
std::string AddFront(OnnxGraphBuilder& g, const ConvFront& front, Activation act,
                     const float* params, const std::string& x) {
  const ImageShape& in = front.input();
  std::string h = g.Node("Reshape", {x, g.Int64Constant("image_shape", {-1, in.channels, in.height, in.width})});
  for (int s = 0; s < static_cast<int>(front.stages().size()); ++s) {
    const ConvFront::Stage& st = front.stages()[static_cast<size_t>(s)];
    const std::vector<float> w = ConvWeights(st, params + front.WeightOffset(s));
    const std::string weight = g.FloatConstant("conv_weight", {st.out_channels, st.in_channels, st.kernel, st.kernel}, w.data());
    const std::string bias = g.FloatConstant("conv_bias", {st.out_channels}, params + front.BiasOffset(s));
    h = g.Node("Conv", {h, weight, bias},
               {OnnxAttribute::Ints("kernel_shape", {st.kernel, st.kernel}),
                OnnxAttribute::Ints("pads", {st.pad, st.pad, st.pad, st.pad}),
                OnnxAttribute::Ints("strides", {1, 1})});
    h = Activate(g, act, h);
    if (st.pool == Pooling::kNone) continue;
    // 2 x 2 windows at stride 2, no padding, odd edges dropped (ceil_mode 0).
    h = g.Node(st.pool == Pooling::kMax ? "MaxPool" : "AveragePool", {h},
               {OnnxAttribute::Ints("kernel_shape", {2, 2}), OnnxAttribute::Ints("strides", {2, 2})});
  }
  h = g.Node("Transpose", {h}, {OnnxAttribute::Ints("perm", {0, 2, 3, 1})});
  return g.Node("Flatten", {h}, {OnnxAttribute::Int("axis", 1)});
}

}  // namespace onnx_network_detail

std::string AddOnnxNetwork(OnnxGraphBuilder& graph, const Mlp& net, const float* params,
                           const std::string& x) {
  std::string h = x;
  if (!net.front().empty()) {
    h = onnx_network_detail::AddFront(graph, net.front(), net.activation(), params, x);
  }
  const std::vector<int>& widths = net.widths();
  for (int l = 0; l < net.layers(); ++l) {
    // Z = H W + 1 b^T; W is width[l] x width[l+1] row-major, Gemm's B as stored.
    const std::string w = graph.FloatConstant("weight", {widths[l], widths[l + 1]}, params + net.WeightOffset(l));
    const std::string b = graph.FloatConstant("bias", {widths[l + 1]}, params + net.BiasOffset(l));
    h = graph.Node("Gemm", {h, w, b});
    if (l + 1 < net.layers()) h = onnx_network_detail::Activate(graph, net.activation(), h);
  }
  return h;
}

}  // namespace chorus

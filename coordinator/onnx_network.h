// One network of an ensemble as ONNX nodes (proto/onnx_graph_builder.h): the convolution stages
// of common/conv_front.h (Conv, the activation, MaxPool or AveragePool, then the channels-last
// flattening the dense layers expect) and the dense layers of common/mlp.h (Gemm, the activation
// between layers; the last layer linear). Values are float32, as chorus computes them.
// Thread safety: free function; the builder is the caller's.
#pragma once

#include <string>

#include "common/mlp.h"
#include "proto/onnx_graph_builder.h"

namespace chorus {

// Adds the network with parameters `params` (net.ParameterCount() floats, common/mlp.h layout)
// reading value `x` (float [N, net.Inputs()], standardised features; with stages the image
// channel-major). Returns the name of its output: float [N, outputs], the logits or the
// (mean, log-variance) of the standardised target.
std::string AddOnnxNetwork(OnnxGraphBuilder& graph, const Mlp& net, const float* params,
                           const std::string& x);

}  // namespace chorus

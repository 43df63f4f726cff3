// A bundle's calibrated predictive as one ONNX model (IR version 8, operator set 13): the
// standardisation, every component's network (coordinator/onnx_network.h, the samples the
// Predictor drew), and the weighted, temperature-scaled mixture of common/predictor.h.
//   input  "features"       float [N, F]: encoded features before standardisation (numeric
//                           columns as values, categorical columns one-hot over the vocabulary,
//                           in the plan's order; IDX: the pixel values)
//   output "probabilities"  double [N, K] (classification): sum_c w_c softmax(z_c / T)
//   outputs "mean", "variance" double [N] (regression, target units): the Gaussian mixture's
//                           mean and total variance, component stddev multiplied by T
// Graph layout and metadata: docs/onnx_export.md. Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include "common/predictor.h"
#include "common/status.h"
#include "proto/bundle_codec.h"

namespace chorus {

// The serialised ModelProto. Requires `predictor` created from file.bundle. Errors:
// kInvalidInput when the components' weights (components x parameters x 4 bytes) or the
// finished model exceed Protobuf's 2 GiB limit on one message, checked before building.
StatusOr<std::string> OnnxModelBytes(const BundleFile& file, const Predictor& predictor);

}  // namespace chorus

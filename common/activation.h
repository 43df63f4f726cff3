// The hidden activations as scalar functions with their derivatives, shared by the dense layers
// (common/mlp.cc) and the convolution stages (common/conv_front.cc), so both compute the same bits.
// relu(z) = max(z, 0); tanh; gelu(z) = z Phi(z) = 0.5 z (1 + erf(z / sqrt 2)) (Hendrycks & Gimpel
// 2016, the exact form PyTorch uses by default).
// Thread safety: pure functions.
#pragma once

#include <cmath>

#include "common/config.h"

namespace chorus {

struct ReluFunction {
  float operator()(float z) const { return z > 0.0f ? z : 0.0f; }
  // g * relu'(z), relu'(z) = [z > 0]
  float Backward(float g, float z) const { return z > 0.0f ? g : 0.0f; }
};

struct TanhFunction {
  float operator()(float z) const { return std::tanh(z); }
  // g * tanh'(z), tanh'(z) = 1 - tanh(z)^2
  float Backward(float g, float z) const {
    const float t = std::tanh(z);
    return g * (1.0f - t * t);
  }
};

struct GeluFunction {
  static constexpr float kInvSqrt2 = 0.70710678118654752f;
  static constexpr float kInvSqrt2Pi = 0.39894228040143268f;
  // Phi(z) = 0.5 (1 + erf(z / sqrt 2)), the standard normal CDF.
  static float NormalCdf(float z) { return 0.5f * (1.0f + std::erf(z * kInvSqrt2)); }
  float operator()(float z) const { return z * NormalCdf(z); }
  // g * gelu'(z), gelu'(z) = Phi(z) + z phi(z)
  float Backward(float g, float z) const {
    return g * (NormalCdf(z) + z * kInvSqrt2Pi * std::exp(-0.5f * z * z));
  }
};

// Calls body(f) with the function object of activation a, so that loops inline it.
template <typename Body>
void WithActivation(Activation a, const Body& body) {
  switch (a) {
    case Activation::kRelu: return body(ReluFunction());
    case Activation::kTanh: return body(TanhFunction());
    case Activation::kGelu: return body(GeluFunction());
  }
}

}  // namespace chorus

#include "tests/testing/random_network.h"

#include <gtest/gtest.h>

#include "common/last_layer_curvature.h"

namespace chorus::testing {

Matrix RandomNormal(int rows, int cols, double sd, Philox& rng) {
  Matrix m(rows, cols);
  for (int i = 0; i < rows; ++i)
    for (int j = 0; j < cols; ++j) m(i, j) = static_cast<float>(sd * rng.NextNormal());
  return m;
}

std::vector<float> RandomParams(const Mlp& mlp, Philox& rng) {
  std::vector<float> params(mlp.ParameterCount());
  mlp.Initialize(rng.NextU64(), params.data());
  for (int l = 0; l < mlp.layers(); ++l) {
    for (int j = 0; j < mlp.widths()[l + 1]; ++j) {
      params[mlp.BiasOffset(l) + j] = static_cast<float>(0.5 * rng.NextNormal());
    }
  }
  return params;
}

Matrix Features(const Mlp& mlp, const std::vector<float>& params, const Matrix& x) {
  StatusOr<Matrix> features = LastHiddenFeatures(mlp, params.data(), x);
  EXPECT_TRUE(features.ok()) << features.status().ToString();
  return features.ok() ? features.value() : Matrix();
}

}  // namespace chorus::testing

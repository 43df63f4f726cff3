// The eight matrix products of one training step of an MLP, run back to back on buffers chained
// as a step chains them: each layer's output is the next layer's input, and the backward
// products read what the forward ones wrote. Used by chorus-bench-gemm (gemm-sequence) and
// chorus-bench-step (piece "products"). Contents are uniform in [-1, 1] (Eigen's Random); the
// values do not change the work. Not thread-safe: one ChainedProducts per thread.
#pragma once

#include <cstdint>
#include <vector>

#include "common/gemm.h"
#include "common/matrix.h"

namespace chorus {

// chorus::Gemm at a product precision, in the product signature Run takes:
// C = op(A) op(B) + beta C.
template <ProductPrecision kPrecision>
void ChorusProductAt(bool ta, bool tb, const Matrix& a, const Matrix& b, float beta, Matrix& c) {
  Gemm(ta ? Transpose::kYes : Transpose::kNo, tb ? Transpose::kYes : Transpose::kNo, 1.0f, a, b,
       beta, c, kPrecision);
}
inline constexpr auto ChorusProduct = ChorusProductAt<ProductPrecision::kFp32>;

struct ChainedProducts {
  Matrix x;                          // the minibatch, batch x widths[0]
  std::vector<Matrix> w, z, dz, dw;  // per layer l: W_l, Z_l (the next layer's input), dZ_l, dW_l

  ChainedProducts(const std::vector<int>& widths, int64_t batch)
      : x(Matrix::Random(batch, widths[0])) {
    for (size_t l = 0; l + 1 < widths.size(); ++l) {
      w.push_back(Matrix::Random(widths[l], widths[l + 1]));
      z.push_back(Matrix::Random(batch, widths[l + 1]));
      dz.push_back(Matrix::Random(batch, widths[l + 1]));
      dw.push_back(Matrix::Random(widths[l], widths[l + 1]));
    }
  }

  const Matrix& input(size_t l) const { return l == 0 ? x : z[l - 1]; }

  // product(ta, tb, a, b, beta, c): C = op(A) op(B) + beta C. Runs the forward products (beta 1,
  // onto the bias), then per layer from the last the input gradient (not for the first layer)
  // and the weight gradient.
  template <typename Product>
  void Run(const Product& product) {
    for (size_t l = 0; l < w.size(); ++l) product(false, false, input(l), w[l], 1.0f, z[l]);
    for (size_t l = w.size(); l-- > 0;) {
      if (l > 0) product(false, true, dz[l], w[l], 0.0f, dz[l - 1]);
      product(true, false, input(l), dz[l], 0.0f, dw[l]);
    }
  }
};

}  // namespace chorus

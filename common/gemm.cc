#include "common/gemm.h"

#include <cassert>

namespace chorus {
namespace {

template <typename OpA, typename OpB>
void Product(float alpha, const OpA& a, const OpB& b, float beta, MatrixRef c) {
  assert(a.rows() == c.rows() && b.cols() == c.cols() && a.cols() == b.rows());
  if (beta == 0.0f) {
    c.noalias() = alpha * (a * b);
  } else {
    if (beta != 1.0f) c *= beta;
    c.noalias() += alpha * (a * b);
  }
}

}  // namespace

void Gemm(Transpose trans_a, Transpose trans_b, float alpha, const ConstMatrixRef& a,
          const ConstMatrixRef& b, float beta, MatrixRef c) {
  const bool ta = trans_a == Transpose::kYes, tb = trans_b == Transpose::kYes;
  if (!ta && !tb) Product(alpha, a, b, beta, c);
  if (!ta && tb) Product(alpha, a, b.transpose(), beta, c);
  if (ta && !tb) Product(alpha, a.transpose(), b, beta, c);
  if (ta && tb) Product(alpha, a.transpose(), b.transpose(), beta, c);
}

const char* GemmBackendName() { return "eigen"; }

}  // namespace chorus

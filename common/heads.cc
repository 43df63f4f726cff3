#include "common/heads.h"

#include <cmath>

#include "common/numeric_constants.h"

namespace chorus {

double SoftmaxCrossEntropy(const ConstMatrixRef& logits, const int32_t* labels, MatrixRef grad,
                           int64_t batch_rows) {
  const int64_t rows = logits.rows(), b = batch_rows > 0 ? batch_rows : rows;
  const float inv_b = 1.0f / static_cast<float>(b);
  double loss = 0.0;
  for (int64_t i = 0; i < rows; ++i) {
    const float m = logits.row(i).maxCoeff();
    auto g = grad.row(i);
    g = (logits.row(i).array() - m).exp().matrix();
    const float sum = g.sum();
    loss += std::log(static_cast<double>(sum)) + m - logits(i, labels[i]);
    g *= inv_b / sum;
    g(labels[i]) -= inv_b;
  }
  return loss / static_cast<double>(b);
}

namespace {

// 0.5 [s + r^2 e^{-s} + ln 2pi] for one row.
double RowGaussianNll(float mu, float s, float y) {
  const double r = static_cast<double>(y) - mu;
  return 0.5 * (static_cast<double>(s) + r * r * std::exp(-static_cast<double>(s)) + kLogTwoPi);
}

}  // namespace

double GaussianNll(const ConstMatrixRef& outputs, const float* targets, MatrixRef grad,
                   int64_t batch_rows, float beta) {
  const int64_t rows = outputs.rows(), b = batch_rows > 0 ? batch_rows : rows;
  const float inv_b = 1.0f / static_cast<float>(b);
  double loss = 0.0;
  for (int64_t i = 0; i < rows; ++i) {
    const float mu = outputs(i, 0), s = outputs(i, 1);
    const float r = targets[i] - mu;
    const float precision = std::exp(-s);
    const float w = beta == 0.0f ? 1.0f : std::exp(beta * s);
    loss += w * 0.5 * (static_cast<double>(s) + static_cast<double>(r) * r * precision + kLogTwoPi);
    grad(i, 0) = -r * precision * (w * inv_b);
    grad(i, 1) = 0.5f * (1.0f - r * r * precision) * (w * inv_b);
  }
  return loss / static_cast<double>(b);
}

double GaussianNllValue(const ConstMatrixRef& outputs, const float* targets) {
  double sum = 0.0;
  for (int64_t i = 0; i < outputs.rows(); ++i) sum += RowGaussianNll(outputs(i, 0), outputs(i, 1), targets[i]);
  return sum / static_cast<double>(outputs.rows());
}

double SoftmaxCrossEntropyValue(const ConstMatrixRef& logits, const int32_t* labels) {
  double sum = 0.0;
  for (int64_t i = 0; i < logits.rows(); ++i) {
    const auto z = logits.row(i).cast<double>();
    const double m = z.maxCoeff();
    sum += std::log((z.array() - m).exp().sum()) + m - z(labels[i]);
  }
  return sum / static_cast<double>(logits.rows());
}

MatrixD Softmax(const ConstMatrixRef& logits, double temperature) {
  MatrixD p = logits.cast<double>() / temperature;
  for (Eigen::Index i = 0; i < p.rows(); ++i) {
    p.row(i).array() -= p.row(i).maxCoeff();
    p.row(i) = p.row(i).array().exp().matrix();
    p.row(i) /= p.row(i).sum();
  }
  return p;
}

}  // namespace chorus

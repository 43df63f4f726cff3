#include "common/last_layer_curvature.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <string>

#include "common/gemm.h"

namespace chorus {
namespace {

constexpr int64_t kFeatureBatchRows = 256;  // rows per forward pass in LastHiddenFeatures
constexpr int64_t kGramBlockRows = 1024;    // rows per float GEMM, summed in double

using StridedMapD = Eigen::Map<MatrixD, 0, Eigen::Stride<Eigen::Dynamic, Eigen::Dynamic>>;

// Per row the numbers Lambda_n is built from: classification p_n = softmax(f_n), regression
// (e^{-s_n}, 1/2). N x K.
MatrixD CurvatureTerms(Task task, const MatrixD& outputs) {
  if (task == Task::kRegression) {
    MatrixD q(outputs.rows(), 2);
    q.col(0) = (-outputs.col(1)).array().exp();
    q.col(1).setConstant(0.5);
    return q;
  }
  MatrixD p = outputs;
  for (Eigen::Index i = 0; i < p.rows(); ++i) {
    p.row(i) = (p.row(i).array() - p.row(i).maxCoeff()).exp().matrix();
    p.row(i) /= p.row(i).sum();
  }
  return p;
}

// Lambda_n(a, b): p_a (delta_ab - p_b) for classification, delta_ab q_a for regression.
double CurvatureEntry(Task task, const MatrixD& q, Eigen::Index n, Eigen::Index a, Eigen::Index b) {
  if (task == Task::kRegression) return a == b ? q(n, a) : 0.0;
  return q(n, a) * ((a == b ? 1.0 : 0.0) - q(n, b));
}

}  // namespace

Status CheckFeatureMatrix(const ConstMatrixRef& m, int64_t width, const std::string& what) {
  if (m.rows() < 1) return Status::InvalidInput(what + ": no rows");
  if (m.cols() != width) {
    return Status::InvalidInput(what + ": " + std::to_string(m.cols()) + " columns, expected " +
                                std::to_string(width));
  }
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      if (!std::isfinite(m(i, j))) {
        return Status::InvalidInput(what + ": row " + std::to_string(i) + ", column " +
                                    std::to_string(j) + " is not finite");
      }
    }
  }
  return Status::Ok();
}

StatusOr<Matrix> LastHiddenFeatures(const Mlp& mlp, const float* params, const ConstMatrixRef& x) {
  CHORUS_RETURN_IF_ERROR(CheckFeatureMatrix(x, mlp.Inputs(), "LastHiddenFeatures: inputs"));
  if (mlp.layers() == 1 && mlp.front().empty()) return Matrix(x);
  const int64_t n = x.rows();
  Matrix features(n, mlp.widths()[mlp.layers() - 1]);
  Mlp::Workspace ws = mlp.MakeWorkspace(std::min(n, kFeatureBatchRows));
  for (int64_t r0 = 0; r0 < n; r0 += kFeatureBatchRows) {
    const int64_t rows = std::min(kFeatureBatchRows, n - r0);
    const ConstMatrixRef chunk = x.middleRows(r0, rows);
    mlp.Forward(params, chunk, ws);
    features.middleRows(r0, rows) = mlp.LastLayerInput(chunk, ws);
  }
  return features;
}

MatrixD LastLayerWeights(const Mlp& mlp, const float* params) {
  const int last = mlp.layers() - 1;
  const int h = mlp.widths()[last], k = mlp.widths().back();
  // W_L (h x K) followed by b_L (K): together the row-major (h+1) x K matrix [W_L; b_L^T]
  return Eigen::Map<const Matrix>(params + mlp.WeightOffset(last), h + 1, k).cast<double>();
}

Matrix LastLayerInputs(const ConstMatrixRef& features) {
  Matrix phi(features.rows(), features.cols() + 1);
  phi.leftCols(features.cols()) = features;
  phi.col(features.cols()).setOnes();
  return phi;
}

MatrixD LastLayerOutputs(const ConstMatrixRef& features, const MatrixD& theta) {
  assert(features.cols() + 1 == theta.rows());
  // F = features W + 1 b^T
  MatrixD f = features.cast<double>() * theta.topRows(features.cols());
  f.rowwise() += theta.row(features.cols());
  return f;
}

MatrixD LastLayerHessian(Task task, const ConstMatrixRef& features, const MatrixD& theta) {
  const Eigen::Index n = features.rows(), d = theta.rows(), k = theta.cols(), p = d * k;
  assert(features.cols() + 1 == d && k >= 2 && (task == Task::kClassification || k == 2));
  const MatrixD q = CurvatureTerms(task, LastLayerOutputs(features, theta));
  MatrixD hessian = MatrixD::Zero(p, p);
  Matrix phi, weighted, gram(d, d);
  MatrixD block(d, d);
  for (Eigen::Index a = 0; a < k; ++a) {
    // Regression's Lambda_n is diagonal: only blocks (a, a).
    for (Eigen::Index b = a; b < (task == Task::kRegression ? a + 1 : k); ++b) {
      // block = sum_n Lambda_n(a, b) phi_n phi_n^T = Phi^T (w .* Phi), a float GEMM per row block
      block.setZero();
      for (Eigen::Index r0 = 0; r0 < n; r0 += kGramBlockRows) {
        const Eigen::Index rows = std::min(kGramBlockRows, n - r0);
        phi = LastLayerInputs(features.middleRows(r0, rows));
        weighted.resize(rows, d);
        for (Eigen::Index i = 0; i < rows; ++i) {
          weighted.row(i) = static_cast<float>(CurvatureEntry(task, q, r0 + i, a, b)) * phi.row(i);
        }
        Gemm(Transpose::kYes, Transpose::kNo, 1.0f, phi, weighted, 0.0f, gram);
        block += gram.cast<double>();
      }
      // Hdata(j K + a, i K + b) = block(j, i); the (b, a) block is its transpose.
      StridedMapD(hessian.data() + a * p + b, d, d, {k * p, k}) = block;
      if (a != b) StridedMapD(hessian.data() + b * p + a, d, d, {k * p, k}) = block.transpose();
    }
  }
  return hessian;
}

KroneckerFactors LastLayerKroneckerFactors(Task task, const ConstMatrixRef& features,
                                           const MatrixD& theta) {
  const Eigen::Index n = features.rows(), d = theta.rows(), k = theta.cols();
  assert(features.cols() + 1 == d && k >= 2 && (task == Task::kClassification || k == 2));
  const MatrixD q = CurvatureTerms(task, LastLayerOutputs(features, theta));
  KroneckerFactors factors{MatrixD::Zero(d, d), MatrixD::Zero(k, k)};
  Matrix gram(d, d);
  for (Eigen::Index r0 = 0; r0 < n; r0 += kGramBlockRows) {
    const Matrix phi = LastLayerInputs(features.middleRows(r0, std::min(kGramBlockRows, n - r0)));
    Gemm(Transpose::kYes, Transpose::kNo, 1.0f, phi, phi, 0.0f, gram);  // G += Phi^T Phi
    factors.feature_gram += gram.cast<double>();
  }
  // A = (1/N) sum_n Lambda_n
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index a = 0; a < k; ++a) {
      for (Eigen::Index b = 0; b < k; ++b) factors.output_curvature(a, b) += CurvatureEntry(task, q, i, a, b);
    }
  }
  factors.output_curvature /= static_cast<double>(n);
  return factors;
}

}  // namespace chorus

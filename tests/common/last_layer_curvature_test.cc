#include "common/last_layer_curvature.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "common/heads.h"
#include "common/rng.h"
#include "tests/testing/random_network.h"

namespace chorus {
namespace last_layer_curvature_test {

constexpr uint64_t kSeed = 20240917;  // every random draw below derives from it

using testing::Features;
using testing::RandomNormal;
using testing::RandomParams;

MatrixD Kron(const MatrixD& a, const MatrixD& b) {
  MatrixD k(a.rows() * b.rows(), a.cols() * b.cols());
  for (Eigen::Index i = 0; i < a.rows(); ++i)
    for (Eigen::Index j = 0; j < a.cols(); ++j) k.block(i * b.rows(), j * b.cols(), b.rows(), b.cols()) = a(i, j) * b;
  return k;
}

// [features 1] in double.
MatrixD Augmented(const Matrix& features) {
  MatrixD phi(features.rows(), features.cols() + 1);
  phi << features.cast<double>(), Eigen::VectorXd::Ones(features.rows());
  return phi;
}

// Gradient of the loss summed over x's rows (batch_rows = 1 turns the heads' mean into a sum)
// with respect to the last P parameters, by Mlp::Forward and Mlp::Backward in float.
Eigen::VectorXd LastLayerGradient(const Mlp& mlp, const std::vector<float>& params, const Matrix& x,
                                  Task task, const std::vector<int32_t>& labels,
                                  const std::vector<float>& targets, int64_t p) {
  Mlp::Workspace ws = mlp.MakeWorkspace(x.rows());
  const MatrixRef out = mlp.Forward(params.data(), x, ws);
  Matrix grad_out(out.rows(), out.cols());
  if (task == Task::kClassification) {
    SoftmaxCrossEntropy(out, labels.data(), grad_out, 1);
  } else {
    GaussianNll(out, targets.data(), grad_out, 1);
  }
  std::vector<float> grad(mlp.ParameterCount());
  mlp.Backward(params.data(), x, grad_out, ws, grad.data());
  return Eigen::Map<const Eigen::VectorXf>(grad.data() + grad.size() - p, p).cast<double>();
}

// Column i of the Hessian by central differences of that gradient in parameter i of the last
// layer: (g(w_i+) - g(w_i-)) / (w_i+ - w_i-), dividing by the float values actually evaluated.
MatrixD FiniteDifferenceHessian(const Mlp& mlp, std::vector<float> params, const Matrix& x,
                                Task task, const std::vector<int32_t>& labels,
                                const std::vector<float>& targets, int64_t p, double h) {
  MatrixD hessian(p, p);
  const int64_t offset = mlp.ParameterCount() - p;
  for (int64_t i = 0; i < p; ++i) {
    const float w = params[offset + i];
    const float up = static_cast<float>(w + h), down = static_cast<float>(w - h);
    params[offset + i] = up;
    const Eigen::VectorXd g_up = LastLayerGradient(mlp, params, x, task, labels, targets, p);
    params[offset + i] = down;
    const Eigen::VectorXd g_down = LastLayerGradient(mlp, params, x, task, labels, targets, p);
    params[offset + i] = w;
    hessian.col(i) = (g_up - g_down) / (static_cast<double>(up) - down);
  }
  return hessian;
}

TEST(LastLayerCurvatureTest, FeaturesMatchDirectForwardPass) {
  // Source: the definition in common/mlp.h, H_l = act(H_{l-1} W_l + 1 b_l^T), evaluated here in
  // double with Eigen; 300 rows take two of LastHiddenFeatures' 256-row batches.
  Philox rng(Derive(kSeed, "features"));
  const Mlp mlp({3, 5, 4, 2}, Activation::kTanh);
  const std::vector<float> params = RandomParams(mlp, rng);
  const Matrix x = RandomNormal(300, 3, 1.0, rng);
  MatrixD h = x.cast<double>();
  for (int l = 0; l < 2; ++l) {
    const int in = mlp.widths()[l], out = mlp.widths()[l + 1];
    const MatrixD w = Eigen::Map<const Matrix>(params.data() + mlp.WeightOffset(l), in, out).cast<double>();
    const Eigen::RowVectorXd b = Eigen::Map<const Eigen::RowVectorXf>(params.data() + mlp.BiasOffset(l), out).cast<double>();
    h = ((h * w).rowwise() + b).array().tanh().matrix();
  }
  const Matrix features = Features(mlp, params, x);
  ASSERT_EQ(features.rows(), 300);
  ASSERT_EQ(features.cols(), 4);
  // float32 products over widths of 3 to 5 with entries of order 1: rounding ~1e-6; 1e-5 margin.
  EXPECT_LE((features.cast<double>() - h).cwiseAbs().maxCoeff(), 1e-5);
  // LastLayerWeights: [W_L; b_L^T] straight from the layout (common/mlp.h).
  const MatrixD theta = LastLayerWeights(mlp, params.data());
  ASSERT_EQ(theta.rows(), 5);
  EXPECT_EQ(theta(4, 1), params[mlp.BiasOffset(2) + 1]);
  EXPECT_EQ(theta(2, 0), params[mlp.WeightOffset(2) + 2 * 2 + 0]);
}

TEST(LastLayerCurvatureTest, ClassificationHessianMatchesFiniteDifferences) {
  for (Activation act : {Activation::kRelu, Activation::kTanh}) {
    SCOPED_TRACE(act == Activation::kRelu ? "relu" : "tanh");
    Philox rng(Derive(kSeed, act == Activation::kRelu ? "fd relu" : "fd tanh"));
    const Mlp mlp({3, 4, 3}, act);
    const std::vector<float> params = RandomParams(mlp, rng);
    const Matrix x = RandomNormal(6, 3, 1.0, rng);
    const std::vector<int32_t> labels = {0, 1, 2, 2, 1, 0};
    const Matrix features = Features(mlp, params, x);
    const MatrixD hessian =
        LastLayerHessian(Task::kClassification, features, LastLayerWeights(mlp, params.data()));
    ASSERT_EQ(hessian.rows(), 15);
    const MatrixD fd =
        FiniteDifferenceHessian(mlp, params, x, Task::kClassification, labels, {}, 15, 1e-2);
    // Source: central differences of the float32 gradient (Mlp::Backward, SoftmaxCrossEntropy);
    // only the last layer moves, so relu's kink is never crossed. Rounding: gradient entries sum
    // 6 rows of terms |phi| |p - y| <= ~3, float32 error ~6 * 3 * 6e-8 = 1e-6, over 2h = 2e-2
    // about 5e-5. Truncation h^2 / 6 |L'''|, |L'''| <= 6 rows * |phi|^3 * 0.1 (the softmax's
    // third derivative), up to ~2e-4 with relu features near 3. Measured worst: 2.1e-4 (relu,
    // entries up to 7.6), 1.8e-5 (tanh); 5e-4 keeps a twofold margin. A wrong block order or
    // weight is off by the entry itself (0.05 .. 7).
    EXPECT_LE((hessian - fd).cwiseAbs().maxCoeff(), 5e-4) << "ours\n" << hessian << "\nfd\n" << fd;
    EXPECT_GT(hessian.cwiseAbs().maxCoeff(), 0.1);  // not a vacuous comparison of zeros
  }
}

TEST(LastLayerCurvatureTest, RegressionHessianIsExactForMeanAndFisherForLogVariance) {
  Philox rng(Derive(kSeed, "fd regression"));
  const Mlp mlp({3, 4, 2}, Activation::kTanh);
  const std::vector<float> params = RandomParams(mlp, rng);
  const Matrix x = RandomNormal(6, 3, 1.0, rng);
  std::vector<float> targets;
  for (int i = 0; i < 6; ++i) targets.push_back(static_cast<float>(rng.NextNormal()));
  const Matrix features = Features(mlp, params, x);
  const MatrixD theta = LastLayerWeights(mlp, params.data());
  const MatrixD hessian = LastLayerHessian(Task::kRegression, features, theta);
  const MatrixD fd = FiniteDifferenceHessian(mlp, params, x, Task::kRegression, {}, targets, 10, 1e-1);
  const MatrixD phi = Augmented(features);
  const Eigen::VectorXd s = LastLayerOutputs(features, theta).col(1);
  double worst_mean = 0.0, worst_fisher = 0.0, worst_cross = 0.0;
  for (int j = 0; j < 5; ++j) {
    for (int i = 0; i < 5; ++i) {
      // Mean-mean block, entries (2j, 2i): the loss is quadratic in mu, so the GGN is the exact
      // Hessian sum_n e^{-s_n} phi_nj phi_ni and central differences carry no truncation error,
      // only float32 rounding ~6 rows * 1e-7 / 2h = 3e-6.
      worst_mean = std::max(worst_mean, std::abs(hessian(2 * j, 2 * i) - fd(2 * j, 2 * i)));
      // Log-variance block: the Fisher information of a Gaussian in its log-variance is 1/2
      // (e.g. Bishop, PRML 2006, from E[(y - mu)^2 e^{-s}] = 1), so sum_n phi_nj phi_ni / 2.
      const double fisher = 0.5 * phi.col(j).dot(phi.col(i));
      worst_fisher = std::max(worst_fisher, std::abs(hessian(2 * j + 1, 2 * i + 1) - fisher));
      // The Fisher is diagonal in (mu, s): no cross terms.
      worst_cross = std::max({worst_cross, std::abs(hessian(2 * j, 2 * i + 1)), std::abs(hessian(2 * j + 1, 2 * i))});
    }
  }
  EXPECT_LE(worst_mean, 5e-5);
  // float32 GEMM over 6 rows of |phi|^2 <= ~9: ~6e-6; 5e-5 margin.
  EXPECT_LE(worst_fisher, 5e-5);
  EXPECT_EQ(worst_cross, 0.0);
  EXPECT_GT(hessian(8, 8), 0.1);
}

TEST(LastLayerCurvatureTest, KroneckerFactorsAreExactOnlyForSharedOutputCurvature) {
  Philox rng(Derive(kSeed, "kfac"));
  const Mlp mlp({3, 5, 4}, Activation::kTanh);
  const std::vector<float> params = RandomParams(mlp, rng);
  const Matrix x = RandomNormal(20, 3, 1.0, rng);
  const Matrix features = Features(mlp, params, x);
  const int k = 4;
  // Zero last layer: every row's logits are equal, so Lambda_n = (I - 11^T / K) / K for all n
  // and sum_n phi phi^T kron Lambda = (sum_n phi phi^T) kron Lambda exactly (the K-FAC identity,
  // Martens & Grosse 2015, exact when the factors do not vary across rows).
  MatrixD theta = MatrixD::Zero(6, k);
  const MatrixD shared = (MatrixD::Identity(k, k) - MatrixD::Constant(k, k, 1.0 / k)) / k;
  KroneckerFactors factors = LastLayerKroneckerFactors(Task::kClassification, features, theta);
  EXPECT_LE((factors.output_curvature - shared).cwiseAbs().maxCoeff(), 1e-12);
  const MatrixD gram = Augmented(features).transpose() * Augmented(features);
  // Float32 GEMMs over 20 rows with |phi|^2 <= 6 (tanh features below 1, and the bias 1): about
  // 20 * 6e-8 relative of entries up to 20 (measured 1.3e-6 for G, 3.6e-7 for Hdata), so 1e-5
  // has a margin; a missing bias column or a wrong 1/N is off by more than 0.1.
  EXPECT_LE((factors.feature_gram - gram).cwiseAbs().maxCoeff(), 1e-5);
  const MatrixD full = LastLayerHessian(Task::kClassification, features, theta);
  EXPECT_LE((full - Kron(factors.feature_gram, factors.output_curvature)).cwiseAbs().maxCoeff(), 1e-5);

  // A trained-like last layer: rows' softmax outputs differ, and the factorisation is no longer exact.
  theta = LastLayerWeights(mlp, params.data()) * 3.0;
  factors = LastLayerKroneckerFactors(Task::kClassification, features, theta);
  const MatrixD full2 = LastLayerHessian(Task::kClassification, features, theta);
  const MatrixD kfac = Kron(factors.feature_gram, factors.output_curvature);
  EXPECT_GT((full2 - kfac).norm() / full2.norm(), 0.05);  // measured 0.19
}

TEST(LastLayerCurvatureTest, RejectsBadInputsWithContext) {
  const Mlp mlp({2, 3, 3}, Activation::kRelu);
  Philox rng(Derive(kSeed, "inputs"));
  const std::vector<float> params = RandomParams(mlp, rng);
  EXPECT_EQ(LastHiddenFeatures(mlp, params.data(), RandomNormal(4, 3, 1.0, rng)).status().code(),
            Status::Code::kInvalidInput);
  EXPECT_EQ(LastHiddenFeatures(mlp, params.data(), Matrix(0, 2)).status().code(),
            Status::Code::kInvalidInput);
  Matrix x = RandomNormal(4, 2, 1.0, rng);
  x(1, 1) = NAN;  // relu would turn it into 0 silently
  const Status nan_input = LastHiddenFeatures(mlp, params.data(), x).status();
  EXPECT_EQ(nan_input.code(), Status::Code::kInvalidInput);
  EXPECT_NE(nan_input.message().find("inputs: row 1, column 1 is not finite"), std::string::npos)
      << nan_input.message();
}

}  // namespace last_layer_curvature_test
}  // namespace chorus

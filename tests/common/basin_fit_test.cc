#include "common/basin_fit.h"

#include <gtest/gtest.h>

#include <Eigen/Cholesky>
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <numeric>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace basin_fit_test {

using testing::MakeTempDir;
using testing::ReadMatrixText;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

// count x dim snapshots w_ij = c_j + s_j z_ij, c_j ~ U(-2, 2), s_j ~ U(0.1, 1.1), z ~ N(0, 1),
// rounded to float so that NumPy and SnapshotMoments see the same values.
MatrixD RandomSnapshots(int count, int dim, Philox* rng) {
  Eigen::VectorXd center(dim), spread(dim);
  for (int j = 0; j < dim; ++j) {
    center(j) = 4.0 * rng->NextUniform() - 2.0;
    spread(j) = 0.1 + rng->NextUniform();
  }
  MatrixD s(count, dim);
  for (int i = 0; i < count; ++i) {
    for (int j = 0; j < dim; ++j) {
      s(i, j) = static_cast<float>(center(j) + spread(j) * rng->NextNormal());
    }
  }
  return s;
}

MatrixD Row(const std::vector<float>& v) {
  return Eigen::Map<const Eigen::RowVectorXf>(v.data(), v.size()).cast<double>();
}

// |ours - ref| <= rel * max(1, |ref|) entrywise.
void ExpectNearRelative(const MatrixD& ours, const MatrixD& ref, double rel, const char* what) {
  ASSERT_EQ(ours.rows(), ref.rows()) << what;
  ASSERT_EQ(ours.cols(), ref.cols()) << what;
  for (Eigen::Index i = 0; i < ref.rows(); ++i) {
    for (Eigen::Index j = 0; j < ref.cols(); ++j) {
      EXPECT_NEAR(ours(i, j), ref(i, j), rel * std::max(1.0, std::abs(ref(i, j))))
          << what << " (" << i << ", " << j << ")";
    }
  }
}

TEST(BasinFitTest, MomentsMatchNumPy) {
  const int count = 30, dim = 50, rank = 5;
  const uint64_t seed = 31;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  const MatrixD snapshots = RandomSnapshots(count, dim, &rng);
  SnapshotMoments moments(dim, rank);
  for (int i = 0; i < count; ++i) {
    const Eigen::RowVectorXf w = snapshots.row(i).cast<float>();
    moments.Add(w.data());
  }
  const std::string dir = MakeTempDir("chorus-basin-moments");
  WriteMatrixText(dir + "/snapshots.txt", snapshots);
  RunReferenceScript("numpy_snapshot_moments.py",
                     {"moments", dir + "/snapshots.txt", std::to_string(rank), dir});
  ASSERT_FALSE(HasFailure());
  EXPECT_EQ(moments.count(), count);
  // Source: NumPy mean(axis=0), var(axis=0) (ddof=0), and snapshot_i - cumsum(...)_i / (i + 1)
  // for the last `rank` i. SnapshotMoments stores float32 (epsilon 6e-8) after each of the 30
  // double-precision Welford updates, so rounding accumulates to at most ~30 * 6e-8 = 2e-6
  // relative; 1e-5 leaves a margin and still catches any wrong formula (e.g. ddof=1 is 3%).
  ExpectNearRelative(Row(moments.mean()), ReadMatrixText(dir + "/mean.txt"), 1e-5, "mean");
  ExpectNearRelative(Row(moments.Variance()), ReadMatrixText(dir + "/variance.txt"), 1e-5,
                     "variance");
  ExpectNearRelative(moments.Deviations().cast<double>(), ReadMatrixText(dir + "/deviations.txt"),
                     1e-5, "deviations");
  const BasinFit fit = FitBasin(moments, BasinMethod::kGaussianLowRank);
  EXPECT_EQ(fit.mean, moments.mean());
  EXPECT_EQ(fit.variance, moments.Variance());
  EXPECT_EQ(fit.deviations, moments.Deviations());
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(BasinFitTest, HeldDeviationsBeforeAndAfterTheRingFills) {
  // Hand-computed: snapshots 1, 3, 5, 7 (one parameter), rank 3.
  SnapshotMoments moments(1, 3);
  for (float w : {1.0f, 3.0f, 5.0f}) moments.Add(&w);
  // Running means 1, 2, 3: deviations 0, 1, 2; variance of {1, 3, 5} = (4 + 0 + 4) / 3.
  EXPECT_EQ(moments.Deviations(), (Matrix(3, 1) << 0.0f, 1.0f, 2.0f).finished());
  EXPECT_FLOAT_EQ(moments.Variance()[0], 8.0f / 3.0f);
  const float seven = 7.0f;
  moments.Add(&seven);
  // Mean 4, deviation 3 replaces the oldest; variance of {1, 3, 5, 7} = (9 + 1 + 1 + 9) / 4.
  EXPECT_EQ(moments.Deviations(), (Matrix(3, 1) << 1.0f, 2.0f, 3.0f).finished());
  EXPECT_FLOAT_EQ(moments.Variance()[0], 5.0f);
  EXPECT_FLOAT_EQ(moments.mean()[0], 4.0f);
  // Before 2 snapshots the variance is 0; rank 0 holds no deviations.
  SnapshotMoments single(1, 0);
  single.Add(&seven);
  EXPECT_EQ(single.Variance()[0], 0.0f);
  EXPECT_EQ(single.Deviations().rows(), 0);
}

// A hand-chosen fit: 6 parameters, R = 4 deviations.
BasinFit HandFit(BasinMethod method) {
  BasinFit fit;
  fit.method = method;
  fit.mean = {0.5f, -1.0f, 2.0f, 0.0f, 1.5f, -0.5f};
  fit.variance = {0.04f, 0.09f, 0.01f, 0.16f, 0.25f, 0.02f};
  if (method != BasinMethod::kGaussianLowRank) return fit;
  fit.deviations = Matrix(4, 6);
  fit.deviations << 0.3f, -0.2f, 0.1f, 0.0f, 0.4f, -0.1f,  //
      -0.1f, 0.3f, 0.2f, -0.3f, 0.1f, 0.2f,                //
      0.2f, 0.1f, -0.3f, 0.2f, -0.2f, 0.1f,                //
      -0.4f, -0.2f, 0.0f, 0.1f, -0.3f, -0.2f;
  return fit;
}

// The covariance basin_fit.h states (SWAG, Maddox et al. 2019): diag(var) for kGaussianDiag,
// diag(var) / 2 + D^T D / (2 (R - 1)) for kGaussianLowRank.
MatrixD StatedCovariance(const BasinFit& fit) {
  const Eigen::VectorXd var = Row(fit.variance).transpose();
  if (fit.method == BasinMethod::kGaussianDiag) return var.asDiagonal();
  const MatrixD d = fit.deviations.cast<double>();
  const MatrixD diag = (0.5 * var).asDiagonal();
  return diag + d.transpose() * d / (2.0 * static_cast<double>(d.rows() - 1));
}

// Draws n samples with seeds Derive(base, s) and checks their mean against fit.mean and their
// covariance against sigma, each entry within 5 standard errors: sqrt(Sigma_jj / n) for a mean,
// sqrt((Sigma_jj Sigma_kk + Sigma_jk^2) / n) for a covariance entry of Gaussian data.
void ExpectSamplesMatch(const BasinFit& fit, double scale, const MatrixD& sigma, uint64_t base) {
  const int n = 200000;
  const Eigen::Index dim = sigma.rows();
  Eigen::VectorXd sum = Eigen::VectorXd::Zero(dim);
  MatrixD sum_sq = MatrixD::Zero(dim, dim);
  Eigen::VectorXf w(dim);
  for (int s = 0; s < n; ++s) {
    DrawBasinSample(fit, Derive(base, s), scale, w.data());
    const Eigen::VectorXd x = w.cast<double>() - Row(fit.mean).transpose();
    sum += x;
    sum_sq.noalias() += x * x.transpose();
  }
  const Eigen::VectorXd mean = sum / n;
  const MatrixD cov = (sum_sq - n * mean * mean.transpose()) / (n - 1);
  for (Eigen::Index j = 0; j < dim; ++j) {
    EXPECT_NEAR(mean(j), 0.0, 5.0 * std::sqrt(sigma(j, j) / n)) << "mean " << j;
    for (Eigen::Index k = 0; k < dim; ++k) {
      const double se = std::sqrt((sigma(j, j) * sigma(k, k) + sigma(j, k) * sigma(j, k)) / n);
      EXPECT_NEAR(cov(j, k), sigma(j, k), 5.0 * se) << "covariance (" << j << ", " << k << ")";
    }
  }
}

TEST(BasinFitTest, SamplesHaveTheStatedCovariance) {
  const uint64_t base = 1234;
  SCOPED_TRACE("base seed " + std::to_string(base));
  for (BasinMethod method : {BasinMethod::kGaussianLowRank, BasinMethod::kGaussianDiag}) {
    SCOPED_TRACE(method == BasinMethod::kGaussianDiag ? "diag" : "low rank");
    const BasinFit fit = HandFit(method);
    ExpectSamplesMatch(fit, 1.0, StatedCovariance(fit), base);
  }
  // `scale` multiplies the covariance.
  const BasinFit fit = HandFit(BasinMethod::kGaussianLowRank);
  ExpectSamplesMatch(fit, 0.25, 0.25 * StatedCovariance(fit), Derive(base, "scale"));
}

TEST(BasinFitTest, SamplesAreDeterministicAndNoneIsTheMember) {
  const BasinFit fit = HandFit(BasinMethod::kGaussianLowRank);
  std::vector<float> a(6), b(6), c(6);
  DrawBasinSample(fit, 99, 1.0, a.data());
  DrawBasinSample(fit, 99, 1.0, b.data());
  DrawBasinSample(fit, 100, 1.0, c.data());
  EXPECT_EQ(a, b);
  EXPECT_NE(a, c);
  EXPECT_NE(a, fit.mean);
  std::vector<float> none(6);
  DrawBasinSample(HandFit(BasinMethod::kNone), 99, 4.0, none.data());
  EXPECT_EQ(none, fit.mean);
  SnapshotMoments moments(2, 2);
  const float snapshots[2][2] = {{1.0f, 2.0f}, {5.0f, 4.0f}};
  for (const float* w : snapshots) moments.Add(w);
  const BasinFit member = FitBasin(moments, BasinMethod::kNone);
  EXPECT_TRUE(member.variance.empty());
  EXPECT_EQ(member.deviations.size(), 0);
  DrawBasinSample(member, 99, 1.0, none.data());
  EXPECT_EQ(std::vector<float>(none.begin(), none.begin() + 2), (std::vector<float>{3.0f, 3.0f}));
}

// Bayesian linear regression data: t = Phi w_true + sigma eps, Phi_ij and eps_i ~ N(0, 1).
struct Regression {
  MatrixD phi;
  Eigen::VectorXd t;
};

Regression MakeRegression(int n, const Eigen::VectorXd& w_true, double sigma, Philox* rng) {
  Regression data{MatrixD(n, w_true.size()), Eigen::VectorXd(n)};
  for (int i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < w_true.size(); ++j) data.phi(i, j) = rng->NextNormal();
    data.t(i) = data.phi.row(i).dot(w_true) + sigma * rng->NextNormal();
  }
  return data;
}

// Bishop, PRML (2006), eqs. 3.53-3.54: m_N = beta S_N Phi^T t, S_N^-1 = alpha I + beta Phi^T Phi.
Eigen::VectorXd PosteriorMean(const Regression& data, double alpha, double beta) {
  const Eigen::Index d = data.phi.cols();
  const Eigen::MatrixXd precision =
      alpha * Eigen::MatrixXd::Identity(d, d) + beta * data.phi.transpose() * data.phi;
  return precision.ldlt().solve(beta * data.phi.transpose() * data.t);
}

// The same m_N from NumPy (np.linalg.solve), a cross-check of the Eigen solve: dim x 1.
MatrixD NumPyPosteriorMean(const Regression& data, double alpha, double beta) {
  const std::string dir = MakeTempDir("chorus-basin-posterior");
  WriteMatrixText(dir + "/phi.txt", data.phi);
  WriteMatrixText(dir + "/t.txt", data.t);
  RunReferenceScript("numpy_snapshot_moments.py",
                     {"posterior", dir + "/phi.txt", dir + "/t.txt", std::to_string(alpha),
                      std::to_string(beta), dir + "/m_n.txt"});
  const MatrixD m_n = ReadMatrixText(dir + "/m_n.txt");
  std::filesystem::remove_all(dir);
  return m_n;
}

// Minibatch SGD on E(w) = mean_i beta (t_i - phi_i^T w)^2 / 2 + lambda ||w||^2 / 2, which is the
// negative log posterior divided by N when lambda = alpha / N.
struct Objective {
  double beta, lambda;
  int batch;
};

// One epoch over a fresh permutation, per batch B:
// w -= lr (lambda w - (beta / |B|) sum_{i in B} (t_i - phi_i^T w) phi_i).
void SgdEpoch(const Regression& data, const Objective& obj, double lr, Philox* rng,
              Eigen::VectorXd* w) {
  std::vector<int> order(data.t.size());
  std::iota(order.begin(), order.end(), 0);
  for (size_t i = order.size() - 1; i > 0; --i) std::swap(order[i], order[rng->NextBelow(i + 1)]);
  for (size_t start = 0; start < order.size(); start += obj.batch) {
    const size_t end = std::min(order.size(), start + obj.batch);
    Eigen::VectorXd grad = obj.lambda * *w;
    for (size_t k = start; k < end; ++k) {
      const auto x = data.phi.row(order[k]).transpose();
      grad -= obj.beta / static_cast<double>(end - start) * (data.t(order[k]) - x.dot(*w)) * x;
    }
    *w -= lr * grad;
  }
}

TEST(BasinFitTest, MeanApproachesBayesianLinearRegressionPosterior) {
  const int n = 500, dim = 5;
  const double sigma = 1.0, alpha = 50.0, beta = 1.0 / (sigma * sigma);
  const uint64_t seed = 2024;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  const Eigen::VectorXd w_true = (Eigen::VectorXd(dim) << 1.5, -2, 0.5, 1, -1).finished();
  const Regression data = MakeRegression(n, w_true, sigma, &rng);
  const Eigen::VectorXd m_n = PosteriorMean(data, alpha, beta);
  ExpectNearRelative(m_n, NumPyPosteriorMean(data, alpha, beta), 1e-9, "m_N");
  // The prior must matter, or least squares would pass too: alpha = 50 against the data's
  // precision ~N = 500 shrinks m_N by ~9% from the least-squares solution.
  ASSERT_GT((PosteriorMean(data, 0.0, beta) - m_n).norm(), 0.05 * m_n.norm());
  const Objective obj{beta, alpha / n, 10};
  Eigen::VectorXd w = Eigen::VectorXd::Zero(dim);
  for (int epoch = 0; epoch < 10; ++epoch) SgdEpoch(data, obj, 0.1, &rng, &w);
  SnapshotMoments moments(dim, 3);
  for (int epoch = 0; epoch < 200; ++epoch) {
    SgdEpoch(data, obj, 0.05, &rng, &w);
    const Eigen::VectorXf snapshot = w.cast<float>();
    moments.Add(snapshot.data());
  }
  const BasinFit fit = FitBasin(moments, BasinMethod::kGaussianLowRank);
  const Eigen::VectorXd mean = Row(fit.mean).transpose();
  // Only the mean is asserted: the covariance of constant-rate SGD iterates matches the
  // posterior covariance only for one particular learning rate (Mandt et al., 2017).
  // Tolerance: the Hessian of E is H ~ (beta + lambda) I ~ 1.1 I and a batch gradient's noise
  // ~ beta / B = 0.1 per weight, so iterates scatter about m_N with s.d. ~ sqrt(lr 0.1 / (2 H))
  // ~ 0.05 and decorrelate in 1 / (lr H) ~ 18 steps, less than an epoch (50 steps). The mean of
  // 200 snapshots is then off by ~0.05 / sqrt(200) ~ 0.0035 a weight, ~0.008 in norm, ~0.3% of
  // ||m_N|| ~ 2.7 (0.26% measured); 2% is ~7 times that and a quarter of the prior's shrinkage.
  EXPECT_LT((mean - m_n).norm(), 0.02 * m_n.norm())
      << "relative error " << (mean - m_n).norm() / m_n.norm();
}

}  // namespace basin_fit_test
}  // namespace chorus

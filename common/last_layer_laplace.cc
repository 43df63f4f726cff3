#include "common/last_layer_laplace.h"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "common/numeric_constants.h"
#include "common/rng.h"

namespace chorus {
namespace {

constexpr int64_t kVarianceBlockRows = 64;  // rows per projection onto the eigenbasis

using ConstOuterMapD = Eigen::Map<const MatrixD, 0, Eigen::OuterStride<>>;

// Hdata's eigenvalues in the order of its eigenvectors; kKronecker: g_i a_m at i K + m.
Eigen::VectorXd HessianEigenvalues(const LastLayerLaplace& la) {
  if (la.form == LaplaceForm::kFull) return la.eigenvalues;
  const Eigen::Index k = la.output_eigenvalues.size();
  Eigen::VectorXd lambda(la.parameters());
  for (Eigen::Index i = 0; i < la.feature_eigenvalues.size(); ++i) {
    lambda.segment(i * k, k) = la.feature_eigenvalues(i) * la.output_eigenvalues;
  }
  return lambda;
}

// Columns of U_G kron U_A: entry (j K + k, i K + m) = U_G(j, i) U_A(k, m).
MatrixD KroneckerEigenvectors(const LastLayerLaplace& la) {
  const MatrixD& g = la.feature_eigenvectors;
  const MatrixD& a = la.output_eigenvectors;
  MatrixD v(g.rows() * a.rows(), g.cols() * a.cols());
  for (Eigen::Index j = 0; j < g.rows(); ++j) {
    for (Eigen::Index i = 0; i < g.cols(); ++i) {
      v.block(j * a.rows(), i * a.cols(), a.rows(), a.cols()) = g(j, i) * a;
    }
  }
  return v;
}

// One N x K matrix per prior precision: v_k(n) = sum_m c_nkm^2 / (lambda_m + prior), c_nkm the
// projection of output k's Jacobian phi_n^T kron e_k onto eigenvector m.
// kFull: c_nkm = sum_j phi_nj V(j K + k, m), O(N P^2) for all priors at once.
std::vector<MatrixD> FullOutputVariances(const LastLayerLaplace& la, const ConstMatrixRef& features,
                                         const std::vector<double>& priors) {
  const Eigen::Index n = features.rows(), d = la.theta_map.rows(), k = la.theta_map.cols();
  const Eigen::Index p = la.parameters(), grid = static_cast<Eigen::Index>(priors.size());
  // inverse(m, g) = 1 / (lambda_m + prior_g)
  MatrixD inverse(p, grid);
  for (Eigen::Index g = 0; g < grid; ++g) inverse.col(g) = (la.eigenvalues.array() + priors[g]).inverse();
  std::vector<MatrixD> variances(priors.size(), MatrixD(n, k));
  for (Eigen::Index r0 = 0; r0 < n; r0 += kVarianceBlockRows) {
    const Eigen::Index rows = std::min(kVarianceBlockRows, n - r0);
    const MatrixD phi = LastLayerInputs(features.middleRows(r0, rows)).cast<double>();
    for (Eigen::Index out = 0; out < k; ++out) {
      // V's rows j K + out, a d x P view
      const ConstOuterMapD v_out(la.eigenvectors.data() + out * p, d, p, Eigen::OuterStride<>(k * p));
      const MatrixD block = (phi * v_out).array().square().matrix() * inverse;  // rows x grid
      for (Eigen::Index g = 0; g < grid; ++g) variances[g].block(r0, out, rows, 1) = block.col(g);
    }
  }
  return variances;
}

// kKronecker: c_{n,k,(i,m)} = (phi_n^T u_G,i) U_A(k, m), so v_k(n) = sum_i (phi_n^T u_G,i)^2 R(i, k)
// with R(i, k) = sum_m U_A(k, m)^2 / (g_i a_m + prior): O(N (H+1)^2) once, O(N (H+1) K) per prior.
std::vector<MatrixD> KroneckerOutputVariances(const LastLayerLaplace& la,
                                              const ConstMatrixRef& features,
                                              const std::vector<double>& priors) {
  const Eigen::Index n = features.rows(), k = la.theta_map.cols();
  const MatrixD ua_sq = la.output_eigenvectors.array().square().matrix();  // U_A(k, m)^2
  std::vector<MatrixD> r, variances(priors.size(), MatrixD(n, k));
  for (double prior : priors) {
    // R = [1 / (g_i a_m + prior)]_{im} (U_A^2)^T
    const MatrixD inverse =
        ((la.feature_eigenvalues * la.output_eigenvalues.transpose()).array() + prior).inverse();
    r.push_back(inverse * ua_sq.transpose());
  }
  for (Eigen::Index r0 = 0; r0 < n; r0 += kVarianceBlockRows) {
    const Eigen::Index rows = std::min(kVarianceBlockRows, n - r0);
    const MatrixD phi = LastLayerInputs(features.middleRows(r0, rows)).cast<double>();
    const MatrixD projected_sq = (phi * la.feature_eigenvectors).array().square().matrix();
    for (size_t g = 0; g < priors.size(); ++g) variances[g].middleRows(r0, rows) = projected_sq * r[g];
  }
  return variances;
}

std::vector<MatrixD> OutputVariances(const LastLayerLaplace& la, const ConstMatrixRef& features,
                                     const std::vector<double>& priors) {
  return la.form == LaplaceForm::kFull ? FullOutputVariances(la, features, priors)
                                       : KroneckerOutputVariances(la, features, priors);
}

// Mean NLL of the probit predictive: -log softmax(mean_k / sqrt(1 + pi/8 v_k))_y.
double ProbitNll(const MatrixD& mean, const MatrixD& variance, const std::vector<int32_t>& labels) {
  double sum = 0.0;
  for (Eigen::Index i = 0; i < mean.rows(); ++i) {
    const Eigen::ArrayXd z =
        mean.row(i).array().transpose() / (1.0 + M_PI / 8.0 * variance.row(i).array().transpose()).sqrt();
    const double m = z.maxCoeff();
    sum += std::log((z - m).exp().sum()) + m - z(labels[i]);
  }
  return sum / static_cast<double>(mean.rows());
}

// Mean Gaussian NLL with variance e^{s} + v_mu: 0.5 [ln 2pi sigma^2 + (y - mu)^2 / sigma^2].
double GaussianPredictiveNll(const MatrixD& mean, const MatrixD& variance,
                             const std::vector<float>& targets) {
  double sum = 0.0;
  for (Eigen::Index i = 0; i < mean.rows(); ++i) {
    const double var = std::exp(mean(i, 1)) + variance(i, 0);
    const double r = targets[i] - mean(i, 0);
    sum += 0.5 * (kLogTwoPi + std::log(var) + r * r / var);
  }
  return sum / static_cast<double>(mean.rows());
}

Status CheckTuningInputs(const LastLayerLaplace& la, Task task, const ConstMatrixRef& features,
                         size_t answers) {
  if (la.task != task) {
    return Status::InvalidInput(std::string("TunePriorPrecision: ") +
                                (task == Task::kRegression ? "targets" : "labels") +
                                " given for a " +
                                (la.task == Task::kRegression ? "regression" : "classification") +
                                " approximation");
  }
  CHORUS_RETURN_IF_ERROR(CheckFeatureMatrix(features, la.theta_map.rows() - 1,
                                       "TunePriorPrecision: validation features"));
  if (answers != static_cast<size_t>(features.rows())) {
    return Status::InvalidInput("TunePriorPrecision: " + std::to_string(answers) + " " +
                                (task == Task::kRegression ? "targets" : "labels") + " for " +
                                std::to_string(features.rows()) + " validation rows");
  }
  return Status::Ok();
}

// The grid value minimising nll(prior); the later (larger) of equal values wins.
template <typename Nll>
double MinimiseOverGrid(const std::vector<MatrixD>& variances, Nll nll) {
  const std::vector<double> grid = PriorPrecisionGrid();
  double best = grid.front(), best_nll = std::numeric_limits<double>::infinity();
  for (size_t g = 0; g < grid.size(); ++g) {
    const double value = nll(variances[g]);
    if (value <= best_nll) best = grid[g], best_nll = value;
  }
  return best;
}

}  // namespace

StatusOr<LastLayerLaplace> FitLastLayerLaplace(Task task, LaplaceForm form,
                                               const ConstMatrixRef& features,
                                               const MatrixD& theta_map, double prior_precision) {
  const std::string where = "FitLastLayerLaplace";
  const Eigen::Index k = theta_map.cols();
  if (k < 2 || (task == Task::kRegression && k != 2)) {
    return Status::InvalidInput(where + ": " + std::to_string(k) + " outputs; " +
                                (task == Task::kRegression ? "regression needs 2 (mean, log-variance)"
                                                           : "classification needs at least 2"));
  }
  CHORUS_RETURN_IF_ERROR(CheckFeatureMatrix(features, theta_map.rows() - 1, where + ": features"));
  if (!theta_map.allFinite()) return Status::InvalidInput(where + ": last-layer weights are not finite");
  if (!(prior_precision > 0.0) || !std::isfinite(prior_precision)) {
    return Status::InvalidInput(where + ": prior precision " + std::to_string(prior_precision) +
                                " is not a finite number > 0");
  }
  LastLayerLaplace la;
  la.task = task;
  la.form = form;
  la.theta_map = theta_map;
  la.prior_precision = prior_precision;
  using Solver = Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd>;
  if (form == LaplaceForm::kFull) {
    Solver eig;
    {
      const MatrixD hessian = LastLayerHessian(task, features, theta_map);
      // Symmetric, so its row-major storage reads as itself column-major: no second copy.
      eig.compute(Eigen::Map<const Eigen::MatrixXd>(hessian.data(), hessian.rows(), hessian.cols()));
    }
    la.eigenvalues = eig.eigenvalues().cwiseMax(0.0);
    la.eigenvectors = eig.eigenvectors();
  } else {
    const KroneckerFactors factors = LastLayerKroneckerFactors(task, features, theta_map);
    const Solver g(Eigen::MatrixXd(factors.feature_gram));
    const Solver a(Eigen::MatrixXd(factors.output_curvature));
    la.feature_eigenvalues = g.eigenvalues().cwiseMax(0.0);
    la.feature_eigenvectors = g.eigenvectors();
    la.output_eigenvalues = a.eigenvalues().cwiseMax(0.0);
    la.output_eigenvectors = a.eigenvectors();
  }
  return la;
}

MatrixD PosteriorCovariance(const LastLayerLaplace& la) {
  const MatrixD v = la.form == LaplaceForm::kFull ? la.eigenvectors : KroneckerEigenvectors(la);
  // Sigma = V diag(1 / (lambda + prior)) V^T
  const Eigen::VectorXd inverse = (HessianEigenvalues(la).array() + la.prior_precision).inverse();
  return v * inverse.asDiagonal() * v.transpose();
}

void DrawLastLayerSample(const LastLayerLaplace& la, const float* map_params, int64_t param_count,
                         uint64_t seed, double scale, float* out) {
  const int64_t p = la.parameters(), offset = param_count - p;
  assert(offset >= 0 && scale > 0.0 && out != map_params);
  std::copy(map_params, map_params + offset, out);
  Philox rng(seed);
  Eigen::VectorXd z(p);
  for (int64_t i = 0; i < p; ++i) z(i) = rng.NextNormal();
  // y = sqrt(scale) diag((lambda + prior)^{-1/2}) z, then delta = V y
  const Eigen::VectorXd y = std::sqrt(scale) * z.cwiseQuotient(
      (HessianEigenvalues(la).array() + la.prior_precision).sqrt().matrix());
  MatrixD delta;
  if (la.form == LaplaceForm::kFull) {
    delta = la.eigenvectors * y;
  } else {
    // (U_G kron U_A) vec_row(Y) = vec_row(U_G Y U_A^T), Y = y as (H+1) x K
    const Eigen::Map<const MatrixD> y_matrix(y.data(), la.theta_map.rows(), la.theta_map.cols());
    delta = la.feature_eigenvectors * y_matrix * la.output_eigenvectors.transpose();
  }
  const double* theta = la.theta_map.data();  // row-major: entry j K + k
  for (int64_t i = 0; i < p; ++i) out[offset + i] = static_cast<float>(theta[i] + delta.data()[i]);
}

StatusOr<LinearizedOutputs> PredictLinearized(const LastLayerLaplace& la,
                                              const ConstMatrixRef& features) {
  CHORUS_RETURN_IF_ERROR(CheckFeatureMatrix(features, la.theta_map.rows() - 1, "PredictLinearized: features"));
  LinearizedOutputs out;
  out.mean = LastLayerOutputs(features, la.theta_map);
  out.variance = std::move(OutputVariances(la, features, {la.prior_precision}).front());
  return out;
}

MatrixD ProbitProbabilities(const MatrixD& mean, const MatrixD& variance) {
  assert(mean.rows() == variance.rows() && mean.cols() == variance.cols());
  // z_k = mean_k / sqrt(1 + pi/8 v_k), then a softmax per row
  MatrixD p = mean.array() / (1.0 + M_PI / 8.0 * variance.array()).sqrt();
  for (Eigen::Index i = 0; i < p.rows(); ++i) {
    p.row(i) = (p.row(i).array() - p.row(i).maxCoeff()).exp().matrix();
    p.row(i) /= p.row(i).sum();
  }
  return p;
}

MatrixD GaussianPredictive(const LinearizedOutputs& outputs) {
  MatrixD g(outputs.mean.rows(), 2);
  g.col(0) = outputs.mean.col(0);
  g.col(1) = outputs.mean.col(1).array().exp().matrix() + outputs.variance.col(0);  // e^s + v_mu
  return g;
}

std::vector<double> PriorPrecisionGrid() {
  std::vector<double> grid;
  for (int i = 0; i <= 32; ++i) grid.push_back(std::pow(10.0, -4.0 + i / 4.0));
  return grid;
}

StatusOr<double> TunePriorPrecision(const LastLayerLaplace& la, const ConstMatrixRef& features,
                                    const std::vector<int32_t>& labels) {
  CHORUS_RETURN_IF_ERROR(CheckTuningInputs(la, Task::kClassification, features, labels.size()));
  const int64_t k = la.theta_map.cols();
  for (size_t i = 0; i < labels.size(); ++i) {
    if (labels[i] < 0 || labels[i] >= k) {
      return Status::InvalidInput("TunePriorPrecision: label " + std::to_string(labels[i]) +
                                  " of row " + std::to_string(i) + " is outside [0, " +
                                  std::to_string(k) + ")");
    }
  }
  const MatrixD mean = LastLayerOutputs(features, la.theta_map);
  return MinimiseOverGrid(OutputVariances(la, features, PriorPrecisionGrid()),
                          [&](const MatrixD& v) { return ProbitNll(mean, v, labels); });
}

StatusOr<double> TunePriorPrecision(const LastLayerLaplace& la, const ConstMatrixRef& features,
                                    const std::vector<float>& targets) {
  CHORUS_RETURN_IF_ERROR(CheckTuningInputs(la, Task::kRegression, features, targets.size()));
  for (size_t i = 0; i < targets.size(); ++i) {
    if (!std::isfinite(targets[i])) {
      return Status::InvalidInput("TunePriorPrecision: target of row " + std::to_string(i) +
                                  " is not finite");
    }
  }
  const MatrixD mean = LastLayerOutputs(features, la.theta_map);
  return MinimiseOverGrid(OutputVariances(la, features, PriorPrecisionGrid()),
                          [&](const MatrixD& v) { return GaussianPredictiveNll(mean, v, targets); });
}

double LaplaceLogEvidence(const LastLayerLaplace& la, double train_nll_sum) {
  const double prior = la.prior_precision;
  const double log_det = (HessianEigenvalues(la).array() + prior).log().sum();
  return -train_nll_sum - 0.5 * prior * la.theta_map.squaredNorm() +
         0.5 * static_cast<double>(la.parameters()) * std::log(prior) - 0.5 * log_det;
}

double PriorPrecisionByEvidence(const LastLayerLaplace& laplace, double train_nll_sum) {
  LastLayerLaplace la = laplace;
  double best = 0, best_evidence = -std::numeric_limits<double>::infinity();
  for (double prior : PriorPrecisionGrid()) {
    la.prior_precision = prior;
    const double evidence = LaplaceLogEvidence(la, train_nll_sum);
    if (evidence >= best_evidence) best = prior, best_evidence = evidence;
  }
  return best;
}

}  // namespace chorus

#include "common/assembly.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

namespace chorus {
namespace {

// Search range of log T and log s, and the grid that brackets the minimum before golden section.
const double kLogScaleLo = std::log(kMinTunedScale);
const double kLogScaleHi = std::log(kMaxTunedScale);
constexpr int kScaleGridPoints = 41;
constexpr double kLogScaleTolerance = 1e-6;

// out_i += w softmax(z_i / T), softmax(x)_k = exp(x_k - max x) / sum_j exp(x_j - max x).
// One row buffer for all rows (the tuning calls this tens of times per subset).
void AddWeightedSoftmax(const Matrix& logits, double weight, double temperature, MatrixD* out) {
  Eigen::RowVectorXd x(logits.cols());
  for (Eigen::Index i = 0; i < logits.rows(); ++i) {
    x = logits.row(i).cast<double>() / temperature;
    x = (x.array() - x.maxCoeff()).exp();
    out->row(i) += (weight / x.sum()) * x;
  }
}

// ln softmax(z_i / T)[y_i] = z_iy / T - max_k z_ik / T - ln sum_k exp(z_ik / T - max_k z_ik / T).
Eigen::VectorXd LabelLogSoftmax(const Matrix& logits, const std::vector<int32_t>& labels,
                                double temperature) {
  Eigen::VectorXd out(logits.rows());
  Eigen::RowVectorXd x(logits.cols());
  for (Eigen::Index i = 0; i < logits.rows(); ++i) {
    x = logits.row(i).cast<double>() / temperature;
    const double max = x.maxCoeff();
    out(i) = x(labels[i]) - max - std::log((x.array() - max).exp().sum());
  }
  return out;
}

// -1/N sum_i ln sum_m w_m softmax(z_mi / T)[y_i], with log-sum-exp over members (no underflow).
double MixtureLogLoss(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                      const std::vector<int32_t>& labels, double temperature) {
  const Eigen::Index n = static_cast<Eigen::Index>(labels.size());
  Eigen::MatrixXd terms(n, logits.size());
  for (size_t m = 0; m < logits.size(); ++m) {
    if (weights[m] > 0) {
      terms.col(m) =
          LabelLogSoftmax(*logits[m], labels, temperature).array() + std::log(weights[m]);
    } else {
      terms.col(m).setConstant(-std::numeric_limits<double>::infinity());
    }
  }
  double loss = 0;
  for (Eigen::Index i = 0; i < n; ++i) {
    const double max = terms.row(i).maxCoeff();
    loss -= max + std::log((terms.row(i).array() - max).exp().sum());
  }
  return n > 0 ? loss / n : 0.0;
}

// Golden section on [a, b]: probes c = b - r (b - a), d = a + r (b - a), r = (sqrt 5 - 1) / 2;
// the end beside the worse probe is dropped until b - a <= tol.
double GoldenSection(const std::function<double(double)>& f, double a, double b, double tol) {
  const double r = 0.5 * (std::sqrt(5.0) - 1.0);
  double c = b - r * (b - a), d = a + r * (b - a);
  double fc = f(c), fd = f(d);
  while (b - a > tol) {
    if (fc <= fd) {
      b = d, d = c, fd = fc;
      c = b - r * (b - a), fc = f(c);
    } else {
      a = c, c = d, fc = fd;
      d = a + r * (b - a), fd = f(d);
    }
  }
  return 0.5 * (a + b);
}

}  // namespace

MatrixD MixtureProbabilities(const std::vector<const Matrix*>& logits,
                             const std::vector<double>& weights, double temperature) {
  assert(!logits.empty() && weights.size() == logits.size() && temperature > 0);
  MatrixD out = MatrixD::Zero(logits[0]->rows(), logits[0]->cols());
  for (size_t m = 0; m < logits.size(); ++m) {
    assert(logits[m]->rows() == out.rows() && logits[m]->cols() == out.cols());
    if (weights[m] > 0) AddWeightedSoftmax(*logits[m], weights[m], temperature, &out);
  }
  return out;
}

GaussianMixture MixtureGaussians(const std::vector<const MemberGaussian*>& members,
                                 const std::vector<double>& weights, double scale) {
  assert(!members.empty() && weights.size() == members.size() && scale > 0);
  const Eigen::Index n = static_cast<Eigen::Index>(members[0]->mean.size());
  const Eigen::Index k = static_cast<Eigen::Index>(members.size());
  GaussianMixture out{MatrixD(n, k), MatrixD(n, k), weights};
  for (size_t m = 0; m < members.size(); ++m) {
    assert(members[m]->mean.size() == static_cast<size_t>(n));
    assert(members[m]->stddev.size() == static_cast<size_t>(n));
    for (Eigen::Index i = 0; i < n; ++i) {
      out.mean(i, m) = members[m]->mean[i];
      out.stddev(i, m) = scale * members[m]->stddev[i];  // sigma_im = s * sigma_m(x_i)
    }
  }
  return out;
}

double TuneTemperature(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                       const std::vector<int32_t>& labels) {
  assert(!logits.empty() && weights.size() == logits.size());
  const auto nll = [&](double log_t) {
    return MixtureLogLoss(logits, weights, labels, std::exp(log_t));
  };
  return std::exp(
      MinimiseScalar(nll, kLogScaleLo, kLogScaleHi, kScaleGridPoints, kLogScaleTolerance));
}

double TuneStddevScale(const std::vector<const MemberGaussian*>& members,
                       const std::vector<double>& weights, const std::vector<double>& targets) {
  assert(!members.empty() && weights.size() == members.size());
  const auto nll = [&](double log_s) {
    return MixtureNll(MixtureGaussians(members, weights, std::exp(log_s)), targets);
  };
  return std::exp(
      MinimiseScalar(nll, kLogScaleLo, kLogScaleHi, kScaleGridPoints, kLogScaleTolerance));
}

bool AtTuningRangeEnd(double tuned) {
  return tuned <= kMinTunedScale * 1.01 || tuned >= kMaxTunedScale / 1.01;
}

double MinimiseScalar(const std::function<double(double)>& f, double lo, double hi, int grid,
                      double tol) {
  assert(grid >= 2 && lo < hi && tol > 0);
  // Grid x_j = lo + j (hi - lo) / (grid - 1); the minimum lies within one step of the best x_j.
  const double step = (hi - lo) / (grid - 1);
  int best = 0;
  double best_f = std::numeric_limits<double>::infinity();
  for (int j = 0; j < grid; ++j) {
    const double fx = f(lo + j * step);
    if (fx < best_f) best = j, best_f = fx;
  }
  const double a = lo + std::max(best - 1, 0) * step;
  const double b = best + 1 < grid ? lo + (best + 1) * step : hi;
  return GoldenSection(f, a, b, tol);
}

}  // namespace chorus

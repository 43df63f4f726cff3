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
constexpr int kScaleGridPoints = TemperatureGridTerms::kGridPoints;
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

// x_j = lo + j (hi - lo) / (grid - 1): the coarse grid of MinimiseScalar, and of TuneTemperature
// over log T (so that TemperatureGridTerms holds exactly the terms the search asks for).
double GridPoint(double lo, double hi, int grid, int j) { return lo + j * ((hi - lo) / (grid - 1)); }

// -1/N sum_i ln sum_m w_m exp(t_mi), with log-sum-exp over members (no underflow), where
// terms_of(m) gives member m's t_mi = ln softmax(z_mi / T)[y_i] for the rows i.
template <typename TermsOf>
double MixtureLogLossOf(size_t members, Eigen::Index n, const std::vector<double>& weights,
                        const TermsOf& terms_of) {
  Eigen::MatrixXd terms(n, members);
  for (size_t m = 0; m < members; ++m) {
    if (weights[m] > 0) {
      terms.col(m) = terms_of(m).array() + std::log(weights[m]);
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

double MixtureLogLoss(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                      const std::vector<int32_t>& labels, double temperature) {
  return MixtureLogLossOf(logits.size(), static_cast<Eigen::Index>(labels.size()), weights,
                          [&](size_t m) { return LabelLogSoftmax(*logits[m], labels, temperature); });
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

// MinimiseScalar with the grid's values from grid_f(j) = f(GridPoint(lo, hi, grid, j)).
double MinimiseOverGrid(const std::function<double(int)>& grid_f, const std::function<double(double)>& f,
                        double lo, double hi, int grid, double tol) {
  assert(grid >= 2 && lo < hi && tol > 0);
  // The minimum lies within one step of the best grid point.
  int best = 0;
  double best_f = std::numeric_limits<double>::infinity();
  for (int j = 0; j < grid; ++j) {
    const double fx = grid_f(j);
    if (fx < best_f) best = j, best_f = fx;
  }
  const double a = GridPoint(lo, hi, grid, std::max(best - 1, 0));
  const double b = best + 1 < grid ? GridPoint(lo, hi, grid, best + 1) : hi;
  return GoldenSection(f, a, b, tol);
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

TemperatureGridTerms::TemperatureGridTerms(const std::vector<const Matrix*>& components,
                                           const std::vector<int32_t>& labels, const ParallelFor* parallel) {
  const size_t bytes = components.size() * kScaleGridPoints * labels.size() * sizeof(double);
  if (bytes > kMaxBytes) return;
  for (const Matrix* c : components) index_.emplace(c, index_.size());
  terms_.resize(index_.size() * kScaleGridPoints);
  std::vector<const Matrix*> by_index(index_.size());
  for (const auto& [c, i] : index_) by_index[i] = c;
  ParallelForEach(parallel, static_cast<int64_t>(terms_.size()), [&](int64_t k) {
    const double log_t = GridPoint(kLogScaleLo, kLogScaleHi, kScaleGridPoints, static_cast<int>(k % kScaleGridPoints));
    terms_[k] = LabelLogSoftmax(*by_index[k / kScaleGridPoints], labels, std::exp(log_t));
  });
}

const Eigen::VectorXd* TemperatureGridTerms::Find(const Matrix* component, int j) const {
  const auto it = index_.find(component);
  return it == index_.end() ? nullptr : &terms_[it->second * kScaleGridPoints + j];
}

double TuneTemperature(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                       const std::vector<int32_t>& labels, const TemperatureGridTerms* grid_terms) {
  assert(!logits.empty() && weights.size() == logits.size());
  const auto nll = [&](double log_t) {
    return MixtureLogLoss(logits, weights, labels, std::exp(log_t));
  };
  const bool all_cached = grid_terms != nullptr && std::all_of(logits.begin(), logits.end(), [&](const Matrix* z) {
    return grid_terms->Find(z, 0) != nullptr;
  });
  const auto grid_nll = [&](int j) {
    if (!all_cached) return nll(GridPoint(kLogScaleLo, kLogScaleHi, kScaleGridPoints, j));
    return MixtureLogLossOf(logits.size(), static_cast<Eigen::Index>(labels.size()), weights,
                            [&](size_t m) -> const Eigen::VectorXd& { return *grid_terms->Find(logits[m], j); });
  };
  return std::exp(
      MinimiseOverGrid(grid_nll, nll, kLogScaleLo, kLogScaleHi, kScaleGridPoints, kLogScaleTolerance));
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
  return MinimiseOverGrid([&](int j) { return f(GridPoint(lo, hi, grid, j)); }, f, lo, hi, grid, tol);
}

}  // namespace chorus

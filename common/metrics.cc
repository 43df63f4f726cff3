#include "common/metrics.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

#include "common/numeric_constants.h"

namespace chorus {
namespace {

constexpr int kMaxBracketDoublings = 64;
constexpr double kQuantileTolerance = 1e-10;  // of the bracket's width
// ceil(c n) is taken this far below c n, so that c n = 7.000000000000001 asks for 7 inputs.
constexpr double kCoverageSlack = 1e-9;

// Bin of confidence c among B bins ((b)/B, (b+1)/B]: b = ceil(c B) - 1, with c = 0 in bin 0.
int ConfidenceBin(double c, int bins) {
  const int b = static_cast<int>(std::ceil(c * bins)) - 1;
  return std::clamp(b, 0, bins - 1);
}

// ln N(y; mu, sigma^2) = -ln sigma - ln sqrt(2 pi) - (y - mu)^2 / (2 sigma^2).
double LogNormalDensity(double y, double mu, double sigma) {
  const double z = (y - mu) / sigma;
  return -std::log(sigma) - kLogSqrtTwoPi - 0.5 * z * z;
}

// -ln sum_m w_m N(y; mu_m, sigma_m^2), by log-sum-exp over the components with w_m > 0.
double MixtureNegLogDensity(const GaussianMixture& mixture, int64_t i, double y) {
  double max_term = -std::numeric_limits<double>::infinity();
  std::vector<double> terms(mixture.weights.size());
  for (size_t m = 0; m < terms.size(); ++m) {
    const double w = mixture.weights[m];
    terms[m] = w > 0 ? std::log(w) + LogNormalDensity(y, mixture.mean(i, m), mixture.stddev(i, m))
                     : -std::numeric_limits<double>::infinity();
    max_term = std::max(max_term, terms[m]);
  }
  double sum = 0;
  for (double t : terms) sum += std::exp(t - max_term);
  return -(max_term + std::log(sum));
}

// Mixture mean: sum_m w_m mu_m.
double MixtureMean(const GaussianMixture& mixture, int64_t i) {
  double mean = 0;
  for (size_t m = 0; m < mixture.weights.size(); ++m)
    mean += mixture.weights[m] * mixture.mean(i, m);
  return mean;
}

}  // namespace

size_t CoveredCount(double c, size_t n) {
  assert(c > 0 && c <= 1 && "coverage must lie in (0, 1]");
  const double wanted = std::ceil(c * static_cast<double>(n) - kCoverageSlack);
  return static_cast<size_t>(std::clamp(wanted, 1.0, static_cast<double>(n)));
}

int64_t TopClass(const MatrixD& probs, int64_t i) {
  int64_t best = 0;
  for (int64_t k = 1; k < probs.cols(); ++k) {
    if (probs(i, k) > probs(i, best)) best = k;
  }
  return best;
}

// Phi(z) = erfc(-z / sqrt 2) / 2.
double MixtureCdf(const GaussianMixture& mixture, int64_t i, double x) {
  double cdf = 0;
  for (size_t m = 0; m < mixture.weights.size(); ++m) {
    const double z = (x - mixture.mean(i, m)) / mixture.stddev(i, m);
    cdf += mixture.weights[m] * 0.5 * std::erfc(-z * M_SQRT1_2);
  }
  return cdf;
}

ClassificationMetrics ScoreClassification(const MatrixD& probs, const std::vector<int32_t>& labels,
                                          int ece_bins) {
  assert(static_cast<size_t>(probs.rows()) == labels.size() && "one label per row");
  ClassificationMetrics out;
  const int64_t n = probs.rows();
  for (int64_t i = 0; i < n; ++i) {
    const int32_t y = labels[i];
    if (TopClass(probs, i) == y) out.accuracy += 1;
    out.nll -= std::log(std::max(probs(i, y), kProbabilityFloor));
    for (int64_t k = 0; k < probs.cols(); ++k) {
      const double d = probs(i, k) - (k == y ? 1.0 : 0.0);
      out.brier += d * d;  // sum_k (p_k - [k == y])^2
    }
  }
  if (n > 0) {
    out.accuracy /= n;
    out.nll /= n;
    out.brier /= n;
  }
  out.ece = ExpectedCalibrationError(probs, labels, ece_bins);
  return out;
}

double ExpectedCalibrationError(const MatrixD& probs, const std::vector<int32_t>& labels,
                                int bins) {
  assert(bins >= 1 && static_cast<size_t>(probs.rows()) == labels.size());
  std::vector<double> correct(bins, 0), confidence(bins, 0);
  for (int64_t i = 0; i < probs.rows(); ++i) {
    const int64_t top = TopClass(probs, i);
    const int b = ConfidenceBin(probs(i, top), bins);
    correct[b] += top == labels[i] ? 1 : 0;
    confidence[b] += probs(i, top);
  }
  // ECE = sum_b (n_b / N) |acc_b - conf_b| = sum_b |correct_b - confidence_sum_b| / N.
  double ece = 0;
  for (int b = 0; b < bins; ++b) ece += std::abs(correct[b] - confidence[b]);
  return probs.rows() > 0 ? ece / probs.rows() : 0.0;
}

RegressionMetrics ScoreRegression(const GaussianMixture& mixture,
                                  const std::vector<double>& targets) {
  assert(static_cast<size_t>(mixture.mean.rows()) == targets.size());
  RegressionMetrics out;
  const int64_t n = mixture.mean.rows();
  for (int64_t i = 0; i < n; ++i) {
    const double y = targets[i];
    const double err = y - MixtureMean(mixture, i);
    out.rmse += err * err;
    const bool inside =
        MixtureQuantile(mixture, i, 0.05) <= y && y <= MixtureQuantile(mixture, i, 0.95);
    out.coverage_90 += inside ? 1 : 0;
  }
  if (n > 0) {
    out.rmse = std::sqrt(out.rmse / n);
    out.coverage_90 /= n;
  }
  out.nll = MixtureNll(mixture, targets);
  return out;
}

double MixtureNll(const GaussianMixture& mixture, const std::vector<double>& targets) {
  assert(static_cast<size_t>(mixture.mean.rows()) == targets.size());
  double nll = 0;
  for (size_t i = 0; i < targets.size(); ++i) nll += MixtureNegLogDensity(mixture, i, targets[i]);
  return targets.empty() ? 0.0 : nll / targets.size();
}

double MixtureQuantile(const GaussianMixture& mixture, int64_t i, double q) {
  assert(q > 0 && q < 1 && !mixture.weights.empty());
  const double spread = mixture.stddev.row(i).maxCoeff();
  double lo = mixture.mean.row(i).minCoeff() - spread;
  double hi = mixture.mean.row(i).maxCoeff() + spread;
  // Widen the bracket until F(lo) <= q <= F(hi); F saturates long before the cap.
  for (int d = 0; d < kMaxBracketDoublings && MixtureCdf(mixture, i, lo) > q; ++d) lo -= hi - lo;
  for (int d = 0; d < kMaxBracketDoublings && MixtureCdf(mixture, i, hi) < q; ++d) hi += hi - lo;
  const double tolerance = kQuantileTolerance * (hi - lo);
  while (hi - lo > tolerance) {
    const double mid = 0.5 * (lo + hi);
    (MixtureCdf(mixture, i, mid) < q ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

}  // namespace chorus

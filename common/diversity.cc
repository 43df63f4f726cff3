#include "common/diversity.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "common/heads.h"
#include "common/numeric_constants.h"

namespace chorus {
namespace {

// Probabilities are floored here inside the logarithm of the KL's second argument only, so a
// class one component rules out costs a large finite divergence instead of infinity.

size_t Kept(size_t n) { return std::min<size_t>(n, kMaxDiversityComponents); }

std::vector<int> TopClass(const MatrixD& p) {
  std::vector<int> top(p.rows());
  for (Eigen::Index i = 0; i < p.rows(); ++i) p.row(i).maxCoeff(&top[i]);
  return top;
}

double MeanKl(const MatrixD& p, const MatrixD& q) {
  double sum = 0.0;
  for (Eigen::Index i = 0; i < p.rows(); ++i) {
    for (Eigen::Index k = 0; k < p.cols(); ++k) {
      const double a = p(i, k);
      if (a > 0.0) sum += a * (std::log(a) - std::log(std::max(q(i, k), kProbabilityFloor)));
    }
  }
  return sum / static_cast<double>(p.rows());
}

double MeanGaussianKl(const MemberGaussian& p, const MemberGaussian& q) {
  double sum = 0.0;
  for (size_t i = 0; i < p.mean.size(); ++i) {
    const double si = p.stddev[i], sj = q.stddev[i], d = p.mean[i] - q.mean[i];
    sum += std::log(sj / si) + (si * si + d * d) / (2.0 * sj * sj) - 0.5;
  }
  return sum / static_cast<double>(p.mean.size());
}

// Averages each measure over members that have at least two samples.
std::optional<DiversityMeasures> AverageWithin(const std::vector<DiversityMeasures>& per_member) {
  if (per_member.empty()) return std::nullopt;
  DiversityMeasures avg;
  for (const DiversityMeasures& d : per_member) {
    avg.components = std::max(avg.components, d.components);
    avg.pairs += d.pairs;
    avg.disagreement += d.disagreement / static_cast<double>(per_member.size());
    avg.mean_kl += d.mean_kl / static_cast<double>(per_member.size());
  }
  return avg;
}

MatrixD MeanProbabilities(const std::vector<const Matrix*>& logits) {
  MatrixD mean = Softmax(*logits[0]);
  for (size_t s = 1; s < logits.size(); ++s) mean += Softmax(*logits[s]);
  return mean / static_cast<double>(logits.size());
}

// The Gaussian with the mean and variance of the equal-weight mixture of `samples`.
MemberGaussian MomentMatched(const std::vector<const MemberGaussian*>& samples) {
  const size_t n = samples[0]->mean.size();
  const double w = 1.0 / static_cast<double>(samples.size());
  MemberGaussian g{std::vector<double>(n, 0.0), std::vector<double>(n, 0.0)};
  for (size_t i = 0; i < n; ++i) {
    double mean = 0.0, second = 0.0;
    for (const MemberGaussian* s : samples) {
      mean += w * s->mean[i];
      second += w * (s->stddev[i] * s->stddev[i] + s->mean[i] * s->mean[i]);
    }
    g.mean[i] = mean;
    g.stddev[i] = std::sqrt(std::max(second - mean * mean, 0.0));
  }
  return g;
}

// Diversity between members (pool: a member's samples -> its own predictive) and within members
// (own: one sample -> its predictive, for members with at least two samples).
template <typename Sample, typename PoolFn, typename OwnFn, typename MeasureFn>
DiversitySummary Summarise(const std::vector<std::vector<const Sample*>>& samples, const PoolFn& pool,
                           const OwnFn& own, const MeasureFn& measure) {
  using Predictive = decltype(pool(samples[0]));
  std::vector<Predictive> members;
  std::vector<DiversityMeasures> within;
  for (size_t m = 0; m < Kept(samples.size()); ++m) {
    members.push_back(pool(samples[m]));
    if (samples[m].size() < 2) continue;
    std::vector<Predictive> predictives;
    for (size_t s = 0; s < Kept(samples[m].size()); ++s) predictives.push_back(own(*samples[m][s]));
    within.push_back(measure(predictives));
  }
  return {measure(members), AverageWithin(within)};
}

}  // namespace

DiversityMeasures ClassificationDiversity(const std::vector<MatrixD>& probs) {
  DiversityMeasures d;
  const size_t n = Kept(probs.size());
  d.components = static_cast<int>(n);
  std::vector<std::vector<int>> top;
  for (size_t c = 0; c < n; ++c) top.push_back(TopClass(probs[c]));
  const double rows = static_cast<double>(probs[0].rows());
  double disagree = 0.0, kl = 0.0;
  for (size_t a = 0; a < n; ++a) {
    for (size_t b = a + 1; b < n; ++b) {
      int64_t differ = 0;
      for (size_t i = 0; i < top[a].size(); ++i) differ += top[a][i] != top[b][i];
      disagree += static_cast<double>(differ) / rows;
      kl += MeanKl(probs[a], probs[b]) + MeanKl(probs[b], probs[a]);
      ++d.pairs;
    }
  }
  d.disagreement = d.pairs > 0 ? disagree / static_cast<double>(d.pairs) : 0.0;
  d.mean_kl = d.pairs > 0 ? kl / (2.0 * static_cast<double>(d.pairs)) : 0.0;
  return d;
}

DiversityMeasures RegressionDiversity(const std::vector<MemberGaussian>& components) {
  DiversityMeasures d;
  const size_t n = Kept(components.size());
  d.components = static_cast<int>(n);
  d.disagreement = std::numeric_limits<double>::quiet_NaN();
  double kl = 0.0;
  for (size_t a = 0; a < n; ++a) {
    for (size_t b = a + 1; b < n; ++b) {
      kl += MeanGaussianKl(components[a], components[b]) + MeanGaussianKl(components[b], components[a]);
      ++d.pairs;
    }
  }
  d.mean_kl = d.pairs > 0 ? kl / (2.0 * static_cast<double>(d.pairs)) : 0.0;
  return d;
}

DiversitySummary ClassificationDiversitySummary(const MemberSamples& samples) {
  return Summarise(samples, MeanProbabilities, [](const Matrix& z) { return Softmax(z); },
                   ClassificationDiversity);
}

DiversitySummary RegressionDiversitySummary(const MemberSampleGaussians& samples) {
  return Summarise(samples, MomentMatched, [](const MemberGaussian& g) { return g; }, RegressionDiversity);
}

}  // namespace chorus

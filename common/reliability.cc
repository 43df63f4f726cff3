#include "common/reliability.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <numeric>

namespace chorus {
namespace {

constexpr double kUpperQuantile = 0.99;

// The histogram's upper edge: see HistogramByOutcome.
double HistogramUpper(std::vector<double> scores) {
  if (scores.empty()) return 1.0;
  std::sort(scores.begin(), scores.end());
  const double upper = scores[CoveredCount(kUpperQuantile, scores.size()) - 1];
  if (upper > 0) return upper;
  return scores.back() > 0 ? scores.back() : 1.0;
}

}  // namespace

std::vector<ReliabilityBin> ReliabilityBins(const MatrixD& probs,
                                            const std::vector<int32_t>& labels, int bins) {
  assert(bins >= 1 && static_cast<size_t>(probs.rows()) == labels.size());
  std::vector<ReliabilityBin> out(static_cast<size_t>(bins));
  for (int b = 0; b < bins; ++b) {
    out[b].lower = static_cast<double>(b) / bins;
    out[b].upper = static_cast<double>(b + 1) / bins;
  }
  for (int64_t i = 0; i < probs.rows(); ++i) {
    const int64_t top = TopClass(probs, i);
    const double c = probs(i, top);
    ReliabilityBin& bin = out[std::clamp(static_cast<int>(std::ceil(c * bins)) - 1, 0, bins - 1)];
    ++bin.count;
    bin.confidence += c;
    bin.accuracy += top == labels[i] ? 1 : 0;
  }
  for (ReliabilityBin& bin : out) {
    if (bin.count == 0) continue;
    bin.confidence /= static_cast<double>(bin.count);
    bin.accuracy /= static_cast<double>(bin.count);
  }
  return out;
}

std::vector<double> MixturePit(const GaussianMixture& mixture, const std::vector<double>& targets) {
  assert(static_cast<size_t>(mixture.mean.rows()) == targets.size());
  std::vector<double> pit(targets.size());
  for (size_t i = 0; i < targets.size(); ++i) {
    pit[i] = MixtureCdf(mixture, static_cast<int64_t>(i), targets[i]);
  }
  return pit;
}

std::vector<IntervalCoverage> IntervalCoverages(const std::vector<double>& pit,
                                                const std::vector<double>& nominal_levels) {
  std::vector<IntervalCoverage> out;
  for (double q : nominal_levels) {
    assert(q > 0 && q < 1);
    double inside = 0;
    for (double u : pit) inside += std::abs(u - 0.5) <= 0.5 * q ? 1 : 0;
    out.push_back({q, pit.empty() ? 0.0 : inside / static_cast<double>(pit.size())});
  }
  return out;
}

OutcomeHistogram HistogramByOutcome(const std::vector<double>& scores, const std::vector<bool>& hit,
                                    int bins) {
  assert(bins >= 1 && scores.size() == hit.size());
  const double upper = HistogramUpper(scores);
  OutcomeHistogram h;
  for (int b = 0; b <= bins; ++b) h.edges.push_back(upper * b / bins);
  h.hits.assign(static_cast<size_t>(bins), 0);
  h.misses.assign(static_cast<size_t>(bins), 0);
  for (size_t i = 0; i < scores.size(); ++i) {
    assert(scores[i] >= 0);
    const double slot = std::floor(scores[i] / upper * bins);
    const size_t b = static_cast<size_t>(std::min(slot, static_cast<double>(bins - 1)));
    ++(hit[i] ? h.hits : h.misses)[b];
  }
  return h;
}

std::vector<double> SelectiveRmse(const std::vector<double>& uncertainty,
                                  const std::vector<double>& errors,
                                  const std::vector<double>& coverages) {
  assert(uncertainty.size() == errors.size());
  const size_t n = errors.size();
  std::vector<size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(),
                   [&](size_t a, size_t b) { return uncertainty[a] < uncertainty[b]; });
  // squared_sum[k]: sum of squared errors of the k least uncertain inputs.
  std::vector<double> squared_sum(n + 1, 0);
  for (size_t k = 0; k < n; ++k) {
    squared_sum[k + 1] = squared_sum[k] + errors[order[k]] * errors[order[k]];
  }
  std::vector<double> rmse;
  for (double c : coverages) {
    if (n == 0) {
      rmse.push_back(std::numeric_limits<double>::quiet_NaN());
      continue;
    }
    const size_t k = CoveredCount(c, n);
    rmse.push_back(std::sqrt(squared_sum[k] / static_cast<double>(k)));
  }
  return rmse;
}

}  // namespace chorus

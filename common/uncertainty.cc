#include "common/uncertainty.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <limits>
#include <numeric>

namespace chorus {
namespace {

// H[p] = -sum_k p_k ln p_k, with 0 ln 0 = 0.
double Entropy(const Eigen::Ref<const Eigen::RowVectorXd>& p) {
  double h = 0;
  for (Eigen::Index k = 0; k < p.size(); ++k) {
    if (p(k) > 0) h -= p(k) * std::log(p(k));
  }
  return h;
}

}  // namespace

UncertaintySplit SplitEntropy(const std::vector<MatrixD>& component_probs,
                              const std::vector<double>& weights) {
  assert(!component_probs.empty() && component_probs.size() == weights.size());
  const Eigen::Index n = component_probs[0].rows();
  UncertaintySplit split{std::vector<double>(n), std::vector<double>(n), std::vector<double>(n)};
  for (Eigen::Index i = 0; i < n; ++i) {
    Eigen::RowVectorXd mixture = Eigen::RowVectorXd::Zero(component_probs[0].cols());
    double aleatoric = 0;
    for (size_t c = 0; c < weights.size(); ++c) {
      mixture += weights[c] * component_probs[c].row(i);
      aleatoric += weights[c] * Entropy(component_probs[c].row(i));
    }
    split.total[i] = Entropy(mixture);
    split.aleatoric[i] = aleatoric;
    // I = H[sum_c w_c p_c] - sum_c w_c H[p_c], clamped at 0 against rounding (I >= 0 exactly).
    split.epistemic[i] = std::max(0.0, split.total[i] - aleatoric);
  }
  return split;
}

UncertaintySplit SplitVariance(const GaussianMixture& mixture) {
  const Eigen::Index n = mixture.mean.rows();
  const Eigen::Map<const Eigen::VectorXd> w(mixture.weights.data(), mixture.weights.size());
  UncertaintySplit split{std::vector<double>(n), std::vector<double>(n), std::vector<double>(n)};
  for (Eigen::Index i = 0; i < n; ++i) {
    // mu = sum_m w_m mu_m; aleatoric = sum_m w_m sigma_m^2; epistemic = sum_m w_m (mu_m - mu)^2.
    const double mu = mixture.mean.row(i).dot(w);
    split.aleatoric[i] = mixture.stddev.row(i).array().square().matrix().dot(w);
    split.epistemic[i] = (mixture.mean.row(i).array() - mu).square().matrix().dot(w);
    split.total[i] = split.aleatoric[i] + split.epistemic[i];
  }
  return split;
}

double Auroc(const std::vector<double>& score, const std::vector<bool>& positive) {
  assert(score.size() == positive.size());
  assert(std::none_of(score.begin(), score.end(), [](double s) { return std::isnan(s); }));
  std::vector<size_t> order(score.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](size_t a, size_t b) { return score[a] < score[b]; });
  // 2U = sum over groups of tied scores of 2 pos_g neg_below + pos_g neg_g, in exact integers.
  int64_t twice_u = 0, negatives_below = 0, positives = 0;
  for (size_t begin = 0, end = 0; begin < order.size(); begin = end) {
    int64_t pos_g = 0, neg_g = 0;
    for (end = begin; end < order.size() && score[order[end]] == score[order[begin]]; ++end) {
      positive[order[end]] ? ++pos_g : ++neg_g;
    }
    twice_u += 2 * pos_g * negatives_below + pos_g * neg_g;
    negatives_below += neg_g;
    positives += pos_g;
  }
  if (positives == 0 || negatives_below == 0) return std::numeric_limits<double>::quiet_NaN();
  return static_cast<double>(twice_u) / (2.0 * static_cast<double>(positives) * negatives_below);
}

std::vector<double> SelectiveAccuracy(const std::vector<double>& confidence,
                                      const std::vector<bool>& correct,
                                      const std::vector<double>& coverages) {
  assert(confidence.size() == correct.size());
  const size_t n = confidence.size();
  std::vector<size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(),
                   [&](size_t a, size_t b) { return confidence[a] > confidence[b]; });
  std::vector<int64_t> correct_in_top(n + 1, 0);  // correct_in_top[k]: correct among the top k
  for (size_t k = 0; k < n; ++k) correct_in_top[k + 1] = correct_in_top[k] + correct[order[k]];
  std::vector<double> accuracy;
  for (double c : coverages) {
    assert(c > 0 && c <= 1 && "coverage must lie in (0, 1]");
    if (n == 0) {
      accuracy.push_back(std::numeric_limits<double>::quiet_NaN());
      continue;
    }
    // accuracy(c) = (1 / k) sum_{j < k} correct[order_j], k = ceil(c n).
    const size_t k = CoveredCount(c, n);
    accuracy.push_back(static_cast<double>(correct_in_top[k]) / static_cast<double>(k));
  }
  return accuracy;
}

}  // namespace chorus

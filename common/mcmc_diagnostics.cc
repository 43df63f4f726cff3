#include "common/mcmc_diagnostics.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <numeric>

namespace chorus {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Chain m's first half becomes row m, its second half row M + m; the middle iteration of an odd
// count is dropped.
MatrixD SplitChains(const MatrixD& draws) {
  assert(draws.rows() >= 1 && draws.cols() >= 4 && "need >= 1 chain of >= 4 iterations");
  const Eigen::Index m = draws.rows(), half = draws.cols() / 2;
  MatrixD split(2 * m, half);
  split.topRows(m) = draws.leftCols(half);
  split.bottomRows(m) = draws.rightCols(half);
  return split;
}

// The pieces of split R-hat shared with the ESS: W and var+ of chains given one a row.
struct ChainVariances {
  Eigen::VectorXd means;
  double within = 0;    // W
  double var_plus = 0;  // (N - 1)/N W + B/N
};

ChainVariances VariancesOf(const MatrixD& chains) {
  const double n = static_cast<double>(chains.cols());
  ChainVariances v;
  v.means = chains.rowwise().mean();
  const MatrixD centred = chains.colwise() - v.means;
  v.within = centred.rowwise().squaredNorm().mean() / (n - 1.0);
  double between_over_n = 0.0;  // B/N: variance of the chain means, divisor M - 1
  if (chains.rows() > 1) {
    between_over_n = (v.means.array() - v.means.mean()).square().sum() /
                     static_cast<double>(chains.rows() - 1);
  }
  v.var_plus = (n - 1.0) / n * v.within + between_over_n;
  return v;
}

double RhatOfSplit(const MatrixD& split) {
  const ChainVariances v = VariancesOf(split);
  if (!(v.within > 0)) return kNaN;
  return std::sqrt(v.var_plus / v.within);
}

// sum_m acov_m(t), acov_m(t) = (1/N) sum_{n < N - t} c_{m,n} c_{m,n+t} on centred chains c.
double SummedAutocovariance(const MatrixD& centred, Eigen::Index t) {
  const Eigen::Index n = centred.cols();
  double sum = 0.0;
  for (Eigen::Index m = 0; m < centred.rows(); ++m)
    sum += centred.row(m).head(n - t).dot(centred.row(m).tail(n - t));
  return sum / static_cast<double>(n);
}

// ESS of chains already split (see the header for the formula).
double EssOfSplit(const MatrixD& split) {
  const ChainVariances v = VariancesOf(split);
  if (!(v.within > 0)) return kNaN;
  const Eigen::Index n = split.cols();
  const double chains = static_cast<double>(split.rows()), nd = static_cast<double>(n);
  const MatrixD centred = split.colwise() - v.means;
  // (1/M) sum_m s_m^2 rho_{t,m} = (1/M) sum_m acov_m(t) N / (N - 1).
  const auto rho = [&](Eigen::Index t) {
    const double weighted = SummedAutocovariance(centred, t) / chains * nd / (nd - 1.0);
    return 1.0 - (v.within - weighted) / v.var_plus;
  };
  double pair_sum = 0.0, previous = std::numeric_limits<double>::infinity();
  for (Eigen::Index t = 0; t + 1 < n; t += 2) {
    const double pair = std::min(rho(t) + rho(t + 1), previous);
    if (!(pair > 0)) break;
    pair_sum += pair;
    previous = pair;
  }
  const double total = chains * nd;
  const double tau = std::max(-1.0 + 2.0 * pair_sum, 1.0 / std::log10(total));
  return total / tau;
}

// The standard normal quantile: the Abramowitz & Stegun (1964) eq. 26.2.23 rational start
// (|error| < 4.5e-4), then three Newton steps on Phi(x) = p with Phi(x) = erfc(-x / sqrt 2) / 2;
// convergence is quadratic, so the result is accurate to rounding for 0 < p < 1.
double NormalQuantile(double p) {
  if (p > 0.5) return -NormalQuantile(1.0 - p);
  const double t = std::sqrt(-2.0 * std::log(p));
  double x = -(t - (2.515517 + t * (0.802853 + t * 0.010328)) /
                       (1.0 + t * (1.432788 + t * (0.189269 + t * 0.001308))));
  constexpr double kInvSqrt2 = 0.70710678118654752, kInvSqrt2Pi = 0.39894228040143268;
  for (int i = 0; i < 3; ++i) {
    const double cdf = 0.5 * std::erfc(-x * kInvSqrt2);
    x -= (cdf - p) / (kInvSqrt2Pi * std::exp(-0.5 * x * x));
  }
  return x;
}

// |draw - median of all draws|.
MatrixD Fold(const MatrixD& draws) {
  std::vector<double> pooled(draws.data(), draws.data() + draws.size());
  const size_t mid = pooled.size() / 2;
  std::nth_element(pooled.begin(), pooled.begin() + mid, pooled.end());
  double median = pooled[mid];
  if (pooled.size() % 2 == 0)
    median = 0.5 * (median + *std::max_element(pooled.begin(), pooled.begin() + mid));
  return (draws.array() - median).abs().matrix();
}

}  // namespace

double SplitRhat(const MatrixD& draws) {
  if (!draws.allFinite()) return kNaN;
  return RhatOfSplit(SplitChains(draws));
}

double EffectiveSampleSize(const MatrixD& draws) {
  if (!draws.allFinite()) return kNaN;
  return EssOfSplit(SplitChains(draws));
}

double RankNormalizedRhat(const MatrixD& draws) {
  if (!draws.allFinite()) return kNaN;
  const double bulk = RhatOfSplit(SplitChains(RankNormalize(draws)));
  const double folded = RhatOfSplit(SplitChains(RankNormalize(Fold(draws))));
  if (std::isnan(bulk) || std::isnan(folded)) return kNaN;
  return std::max(bulk, folded);
}

double BulkEss(const MatrixD& draws) {
  if (!draws.allFinite()) return kNaN;
  return EssOfSplit(SplitChains(RankNormalize(draws)));
}

MatrixD RankNormalize(const MatrixD& draws) {
  const Eigen::Index count = draws.size();
  std::vector<Eigen::Index> order(count);
  std::iota(order.begin(), order.end(), 0);
  const double* x = draws.data();
  std::stable_sort(order.begin(), order.end(),
                   [x](Eigen::Index a, Eigen::Index b) { return x[a] < x[b]; });
  MatrixD z(draws.rows(), draws.cols());
  const double denominator = static_cast<double>(count) + 0.25;
  for (Eigen::Index first = 0; first < count;) {
    Eigen::Index last = first + 1;  // [first, last): a run of equal values
    while (last < count && x[order[last]] == x[order[first]]) ++last;
    const double rank = 0.5 * static_cast<double>(first + 1 + last);  // mean of first+1 .. last
    const double value = NormalQuantile((rank - 0.375) / denominator);
    for (Eigen::Index k = first; k < last; ++k) z.data()[order[k]] = value;
    first = last;
  }
  return z;
}

DrawsSummary SummarizeDraws(const std::vector<MatrixD>& chains) {
  assert(!chains.empty());
  const Eigen::Index dims = chains.front().cols(), iterations = chains.front().rows();
  DrawsSummary summary;
  summary.min_bulk_ess = std::numeric_limits<double>::infinity();
  MatrixD scalar(static_cast<Eigen::Index>(chains.size()), iterations);
  for (Eigen::Index d = 0; d < dims; ++d) {
    for (size_t c = 0; c < chains.size(); ++c) {
      assert(chains[c].rows() == iterations && chains[c].cols() == dims);
      scalar.row(static_cast<Eigen::Index>(c)) = chains[c].col(d).transpose();
    }
    const double rhat = RankNormalizedRhat(scalar), ess = BulkEss(scalar);
    if (!(rhat <= summary.max_rhat) && !std::isnan(summary.max_rhat)) {
      summary.max_rhat = rhat;
      summary.max_rhat_dim = d;
    }
    if (!(ess >= summary.min_bulk_ess) && !std::isnan(summary.min_bulk_ess)) {
      summary.min_bulk_ess = ess;
      summary.min_bulk_ess_dim = d;
    }
  }
  return summary;
}

}  // namespace chorus

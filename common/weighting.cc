#include "common/weighting.h"

#include <Eigen/Cholesky>
#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <utility>

namespace chorus {
namespace {

// StackingWeights maximises the barrier objective f(w) + mu sum_m ln w_m on {sum_m w = 1} by
// damped Newton steps, shrinking mu by kMuShrink each time the point is centred. At a centred
// point g_m = 1 + M mu - mu / w_m, so the KKT gap is below M mu; mu stops at its floor
// max(kMuFloorFactor * tolerance / M, kMinMu), where that bound is far below the tolerance.
// Members the barrier only holds off zero are then dropped to exactly 0 (DropBoundMembers).
constexpr double kMuShrink = 0.1;
constexpr double kMuFloorFactor = 1e-3;
constexpr double kMinMu = 1e-30;            // keeps K positive definite even when tolerance is 0
constexpr double kInitialMuTimesM = 0.1;    // mu M at the start: barrier push of order 0.1
constexpr double kCentredDecrement = 1e-3;  // centred when lambda^2 <= kCentredDecrement mu
constexpr double kToBoundary = 0.99;        // a step goes at most 99% of the way to w_m = 0
constexpr double kArmijo = 0.25;
constexpr double kMinStep = 1e-12;

// The objective f(w) = mean_i ln q_i, q = L w, and its gradient g_m = mean_i L(i, m) / q_i.
struct Evaluation {
  Eigen::VectorXd q;
  Eigen::VectorXd gradient;
  double objective = 0;
};

Evaluation Evaluate(const MatrixD& likelihoods, const Eigen::VectorXd& w) {
  const double n = static_cast<double>(likelihoods.rows());
  Evaluation e;
  e.q = likelihoods * w;
  e.gradient = likelihoods.transpose() * e.q.cwiseInverse() / n;
  e.objective = e.q.array().log().sum() / n;
  return e;
}

// phi(w) = mean_i ln (L w)_i + mu sum_m ln w_m.
double BarrierObjective(const MatrixD& likelihoods, const Eigen::VectorXd& w, double mu) {
  const double n = static_cast<double>(likelihoods.rows());
  return (likelihoods * w).array().log().sum() / n + mu * w.array().log().sum();
}

// Newton step d of phi on {sum d = 0}: K d = G - nu 1 with G = g + mu / w and
// K = L^T diag(1 / q^2) L / n + mu diag(1 / w^2) (positive definite while mu > 0).
Eigen::VectorXd NewtonDirection(const MatrixD& likelihoods, const Evaluation& e,
                                const Eigen::VectorXd& w, double mu) {
  const double n = static_cast<double>(likelihoods.rows());
  const MatrixD scaled = e.q.cwiseInverse().asDiagonal() * likelihoods;
  Eigen::MatrixXd k = scaled.transpose() * scaled / n;
  k.diagonal() += mu * w.array().square().inverse().matrix();
  const Eigen::LDLT<Eigen::MatrixXd> solver(k);
  const Eigen::VectorXd a = solver.solve(e.gradient + mu * w.cwiseInverse());
  const Eigen::VectorXd b = solver.solve(Eigen::VectorXd::Ones(w.size()));
  return a - (a.sum() / b.sum()) * b;
}

// Backtracking from the largest step that keeps w > 0 (capped at 1) until phi rises by at least
// kArmijo t slope; returns the step length, or 0 if none above kMinStep does.
double LineSearch(const MatrixD& likelihoods, const Eigen::VectorXd& w, const Eigen::VectorXd& d,
                  double mu, double slope) {
  double t = 1.0;
  for (Eigen::Index m = 0; m < w.size(); ++m) {
    if (d(m) < 0) t = std::min(t, -kToBoundary * w(m) / d(m));
  }
  const double start = BarrierObjective(likelihoods, w, mu);
  for (; t >= kMinStep; t *= 0.5) {
    if (BarrierObjective(likelihoods, w + t * d, mu) >= start + kArmijo * t * slope) return t;
  }
  return 0;
}

// The barrier loop from uniform weights, until the KKT gap is within `tolerance`, mu is centred
// at its floor, or `max_iterations` passes. Returns the weights; *mu is the last barrier weight.
Eigen::VectorXd SolveBarrier(const MatrixD& likelihoods, double tolerance, int max_iterations,
                             double* mu, int* iterations) {
  const Eigen::Index members = likelihoods.cols();
  const double mu_floor = std::max(kMuFloorFactor * tolerance / members, kMinMu);
  *mu = std::max(kInitialMuTimesM / members, mu_floor);
  Eigen::VectorXd w = Eigen::VectorXd::Constant(members, 1.0 / members);
  for (*iterations = 0; *iterations < max_iterations; ++*iterations) {
    const Evaluation e = Evaluate(likelihoods, w);
    if (e.gradient.maxCoeff() - 1.0 <= tolerance) break;
    const Eigen::VectorXd d = NewtonDirection(likelihoods, e, w, *mu);
    const double decrement = (e.gradient + *mu * w.cwiseInverse()).dot(d);  // = d^T K d
    const double t =
        decrement > kCentredDecrement * *mu ? LineSearch(likelihoods, w, d, *mu, decrement) : 0.0;
    if (t > 0) {
      w += t * d;
      w /= w.sum();  // undo the drift of sum w from rounding
    } else if (*mu > mu_floor) {
      *mu = std::max(*mu * kMuShrink, mu_floor);
    } else {
      break;  // centred at the smallest mu: nothing left that rounding lets us gain
    }
  }
  return w;
}

// Members the barrier only holds off zero (w_m < sqrt(mu); there w_m ~ mu / (1 - g_m), while a
// free member's weight does not shrink with mu) are set to exactly 0 and the rest renormalised,
// which gains about sum_m w_m (1 - g_m) of objective. Kept only if the objective does not fall
// and the KKT gap stays within max(tolerance, its value before).
void DropBoundMembers(const MatrixD& likelihoods, double mu, double tolerance, Eigen::VectorXd* w,
                      Evaluation* e) {
  Eigen::VectorXd kept = (w->array() < std::sqrt(mu)).select(0.0, *w);
  if (kept == *w || kept.sum() <= 0) return;
  kept /= kept.sum();
  Evaluation candidate = Evaluate(likelihoods, kept);
  const double gap_bound = std::max(tolerance, e->gradient.maxCoeff() - 1.0);
  if (candidate.objective >= e->objective && candidate.gradient.maxCoeff() - 1.0 <= gap_bound) {
    *w = std::move(kept);
    *e = std::move(candidate);
  }
}

}  // namespace

StackingResult StackingWeights(const MatrixD& likelihoods, double tolerance, int max_iterations) {
  assert(likelihoods.rows() > 0 && likelihoods.cols() > 0 && "empty likelihood matrix");
  assert(likelihoods.minCoeff() >= 0 && "likelihoods must be non-negative");
  StackingResult result;
  double mu = 0;
  Eigen::VectorXd w = SolveBarrier(likelihoods, tolerance, max_iterations, &mu, &result.iterations);
  Evaluation e = Evaluate(likelihoods, w);
  DropBoundMembers(likelihoods, mu, tolerance, &w, &e);
  result.weights.assign(w.data(), w.data() + w.size());
  result.log_score = e.objective;
  result.optimality_gap = e.gradient.maxCoeff() - 1.0;
  return result;
}

std::vector<double> GreedyWeights(const MatrixD& likelihoods, int rounds) {
  const Eigen::Index members = likelihoods.cols();
  const double n = static_cast<double>(likelihoods.rows());
  // Candidate NLL of the multiset with summed likelihoods `sum` plus member m, of size `size`:
  // -mean_i ln ((sum_i + L(i, m)) / size).
  auto candidate_nll = [&](const Eigen::VectorXd& sum, Eigen::Index m, int size) {
    return -((sum + likelihoods.col(m)) / size).array().log().sum() / n;
  };
  std::vector<int> counts(members, 0);
  Eigen::VectorXd sum = Eigen::VectorXd::Zero(likelihoods.rows());
  std::vector<int> best_counts;
  double best_nll = std::numeric_limits<double>::infinity();
  for (int size = 1; size <= rounds + 1; ++size) {
    Eigen::Index pick = 0;
    double pick_nll = candidate_nll(sum, 0, size);
    for (Eigen::Index m = 1; m < members; ++m) {
      const double nll = candidate_nll(sum, m, size);
      if (nll < pick_nll) pick = m, pick_nll = nll;
    }
    ++counts[pick];
    sum += likelihoods.col(pick);
    if (best_counts.empty() || pick_nll < best_nll) best_counts = counts, best_nll = pick_nll;
  }
  int size = 0;
  for (int c : best_counts) size += c;
  std::vector<double> weights(members);
  for (Eigen::Index m = 0; m < members; ++m)
    weights[m] = static_cast<double>(best_counts[m]) / size;
  return weights;
}

double MixtureNllFromLikelihoods(const MatrixD& likelihoods, const std::vector<double>& weights) {
  assert(static_cast<Eigen::Index>(weights.size()) == likelihoods.cols() && "one weight a member");
  // -mean_i ln sum_m w_m L(i, m).
  const Eigen::Map<const Eigen::VectorXd> w(weights.data(), weights.size());
  return -(likelihoods * w).array().log().mean();
}

}  // namespace chorus

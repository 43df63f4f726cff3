// Basin fits: a Gaussian over a member's weights fitted from snapshots of SGD iterates taken while
// training continues at a constant learning rate (SWAG: Maddox et al., NeurIPS 2019), or over its
// last layer from the loss curvature at the trained point (last-layer Laplace,
// common/last_layer_laplace.h), and drawing weight samples from it.
// Memory: SnapshotMoments holds a mean and a sum of squared deviations (float, Welford updates
// computed in double) plus at most `rank` deviation vectors: (rank + 2) x parameters x 4 bytes.
// Thread safety: SnapshotMoments is single-threaded; BasinFit is immutable and shareable;
// DrawBasinSample is reentrant.
#pragma once

#include <algorithm>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/last_layer_laplace.h"
#include "common/matrix.h"
#include "common/status.h"

namespace chorus {

struct BasinFit;

class SnapshotMoments {
 public:
  // dim: number of parameters, >= 1; rank: deviation vectors kept, >= 0.
  SnapshotMoments(int64_t dim, int rank);

  // Adds one snapshot w (dim floats): Welford update of mean and squared-deviation sum, then
  // (if rank > 0) stores d = w - mean_after_update as the newest deviation, dropping the oldest
  // when `rank` are already held.
  void Add(const float* w);

  int64_t count() const { return count_; }
  int64_t dim() const { return static_cast<int64_t>(mean_.size()); }
  const std::vector<float>& mean() const { return mean_; }
  // Population variance per parameter: sum of squared deviations / count (0 before 2 snapshots).
  std::vector<float> Variance() const;
  // The held deviations, oldest first: rows = min(count, rank), cols = dim.
  Matrix Deviations() const;

 private:
  friend BasinFit FitBasin(SnapshotMoments&& moments, BasinMethod method);

  // var_i = M2_i / count, 0 before 2 snapshots.
  float VarianceFrom(float m2) const {
    return count_ < 2 ? 0.0f : static_cast<float>(m2 * (1.0 / static_cast<double>(count_)));
  }
  int64_t HeldRows() const { return std::min<int64_t>(count_, rank_); }
  int64_t OldestRow() const { return count_ >= rank_ ? next_row_ : 0; }

  int64_t count_ = 0;
  int rank_;
  std::vector<float> mean_, m2_;
  Matrix ring_;          // rank x dim, ring buffer of deviations
  int64_t next_row_ = 0;  // row of ring_ the next deviation goes to
};

// A last-layer Laplace posterior (common/last_layer_laplace.h LastLayerLaplace) at float
// precision, as results and bundles store it: the eigenbasis of the last layer's loss curvature
// and the prior precision. The trained last layer is the end of BasinFit::mean.
struct LaplaceFactors {
  LaplaceForm form = LaplaceForm::kFull;
  int outputs = 0;               // K, the network's outputs
  double prior_precision = 1.0;  // > 0
  Matrix eigenvectors;           // kFull: P x P (P = (H+1) K); kKronecker: U_G, (H+1) x (H+1)
  std::vector<float> eigenvalues;
  Matrix output_eigenvectors;    // kKronecker: U_A, K x K; empty for kFull
  std::vector<float> output_eigenvalues;
};

// A fitted Gaussian N(mean, Sigma):
//   kGaussianDiag:     Sigma = diag(variance)
//   kGaussianLowRank:  Sigma = diag(variance) / 2 + D^T D / (2 (R - 1)), D = deviations (R x dim)
//   kLaplaceLastLayer: Sigma zero except on the last layer's P weights, there the Laplace
//                      posterior covariance of `laplace`
//   kCyclicalSgmcmc:   no Gaussian: the weights the sampler collected, one per row of `samples`
//                      (sample "seed" s is row s); mean is the member's last weights
//   kNone:             the point mass at `mean` (the member itself)
struct BasinFit {
  BasinMethod method = BasinMethod::kNone;
  std::vector<float> mean;
  std::vector<float> variance;  // empty unless kGaussianDiag or kGaussianLowRank
  Matrix deviations;            // R x dim; empty unless kGaussianLowRank
  LaplaceFactors laplace;       // kLaplaceLastLayer only
  Matrix samples;               // S x dim; kCyclicalSgmcmc only
};

// Ok, or kInvalidInput (prefixed with `where`) unless a kCyclicalSgmcmc fit's samples have
// mean.size() columns and finite values, and every seed names one of their rows.
Status CheckCollectedSamples(const BasinFit& fit, const std::vector<uint64_t>& seeds, const std::string& where);

// "full" / "kronecker", and the inverse (nullopt for an unknown name).
const char* LaplaceFormName(LaplaceForm form);
std::optional<LaplaceForm> ParseLaplaceForm(const std::string& name);

// The Laplace fit as a BasinFit of `params` (the trained point): its factors rounded to float, the
// precision they are stored and sampled at, so that samples drawn before and after a result or
// bundle round trip are the same bits.
BasinFit LaplaceBasinFit(const LastLayerLaplace& laplace, std::vector<float> params);
// The fit's Laplace posterior in double (from the float factors). Requires kLaplaceLastLayer and
// factors that pass CheckLaplaceFactors.
LastLayerLaplace ToLastLayerLaplace(const BasinFit& fit);
// Ok, or kInvalidInput (prefixed with `where`) unless the factors' shapes agree with each other
// and with `mean` (P <= mean.size()), every value is finite, eigenvalues are >= 0 and the prior
// precision > 0. For data that crossed a process or file boundary.
Status CheckLaplaceFactors(const BasinFit& fit, const std::string& where);

// Builds the fit from the moments' own storage instead of copies: the mean is moved, the variance
// computed in place of the squared-deviation sums and the ring of deviations rotated in place to
// oldest-first, so peak memory stays (rank + 2) x parameters floats. `moments` is left empty
// (count 0, dim 0). kGaussianLowRank needs at least 2 deviations (R >= 2).
BasinFit FitBasin(SnapshotMoments&& moments, BasinMethod method);
// The same fit from a copy of the moments.
BasinFit FitBasin(const SnapshotMoments& moments, BasinMethod method);

// Writes one weight sample into out (dim floats), a pure function of (fit, seed, scale):
//   diag:    w = mean + sqrt(scale) * sqrt(variance) .* z1
//   lowrank: w = mean + sqrt(scale) * ( sqrt(variance / 2) .* z1 + D^T z2 / sqrt(2 (R - 1)) )
// with z1 ~ N(0, I_dim), z2 ~ N(0, I_R) drawn from Philox(seed) (z1 first, then z2);
//   laplace_last_layer: DrawLastLayerSample (common/last_layer_laplace.h) at `scale`;
//   cyclical_sgmcmc: row `seed` of samples (seed < rows; scale unused).
// `scale` (> 0) multiplies the covariance; kNone writes the mean.
void DrawBasinSample(const BasinFit& fit, uint64_t seed, double scale, float* out);

}  // namespace chorus

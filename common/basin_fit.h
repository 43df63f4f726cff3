// Basin fits: a Gaussian over a member's weights fitted from snapshots of SGD iterates taken while
// training continues at a constant learning rate (SWAG: Maddox et al., NeurIPS 2019), and drawing
// weight samples from it.
// Memory: SnapshotMoments holds a mean and a sum of squared deviations (float, Welford updates
// computed in double) plus at most `rank` deviation vectors: (rank + 2) x parameters x 4 bytes.
// Thread safety: SnapshotMoments is single-threaded; BasinFit is immutable and shareable;
// DrawBasinSample is reentrant.
#pragma once

#include <algorithm>
#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/matrix.h"

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

// A fitted Gaussian N(mean, Sigma):
//   kGaussianDiag:    Sigma = diag(variance)
//   kGaussianLowRank: Sigma = diag(variance) / 2 + D^T D / (2 (R - 1)), D = deviations (R x dim)
//   kNone:            the point mass at `mean` (the member itself)
struct BasinFit {
  BasinMethod method = BasinMethod::kNone;
  std::vector<float> mean;
  std::vector<float> variance;  // empty for kNone
  Matrix deviations;            // R x dim; empty unless kGaussianLowRank
};

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
// with z1 ~ N(0, I_dim), z2 ~ N(0, I_R) drawn from Philox(seed) (z1 first, then z2).
// `scale` (> 0) multiplies the covariance; kNone writes the mean.
void DrawBasinSample(const BasinFit& fit, uint64_t seed, double scale, float* out);

}  // namespace chorus

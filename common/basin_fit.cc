#include "common/basin_fit.h"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "common/rng.h"

namespace chorus {

SnapshotMoments::SnapshotMoments(int64_t dim, int rank)
    : rank_(rank), mean_(dim, 0.0f), m2_(dim, 0.0f), ring_(Matrix::Zero(rank, dim)) {
  assert(dim >= 1 && rank >= 0);
}

void SnapshotMoments::Add(const float* w) {
  ++count_;
  const double inv_n = 1.0 / static_cast<double>(count_);
  float* dev = rank_ > 0 ? ring_.row(next_row_).data() : nullptr;
  for (size_t i = 0; i < mean_.size(); ++i) {
    // delta = w - mean_{n-1}; mean_n = mean_{n-1} + delta / n; M2_n = M2_{n-1} + delta (w - mean_n)
    const double x = w[i], delta = x - mean_[i];
    const double mean = mean_[i] + delta * inv_n;
    mean_[i] = static_cast<float>(mean);
    m2_[i] = static_cast<float>(m2_[i] + delta * (x - mean));
    if (dev != nullptr) dev[i] = static_cast<float>(x - mean);
  }
  if (rank_ > 0) next_row_ = (next_row_ + 1) % rank_;
}

std::vector<float> SnapshotMoments::Variance() const {
  std::vector<float> var(m2_.size());
  for (size_t i = 0; i < var.size(); ++i) var[i] = VarianceFrom(m2_[i]);
  return var;
}

Matrix SnapshotMoments::Deviations() const {
  const int64_t rows = HeldRows(), oldest = OldestRow();
  Matrix out(rows, ring_.cols());
  for (int64_t r = 0; r < rows; ++r) out.row(r) = ring_.row((oldest + r) % rank_);
  return out;
}

BasinFit FitBasin(const SnapshotMoments& moments, BasinMethod method) {
  return FitBasin(SnapshotMoments(moments), method);
}

BasinFit FitBasin(SnapshotMoments&& moments, BasinMethod method) {
  BasinFit fit;
  fit.method = method;
  if (method != BasinMethod::kNone) {
    fit.variance = std::move(moments.m2_);
    for (float& v : fit.variance) v = moments.VarianceFrom(v);
  }
  if (method == BasinMethod::kGaussianLowRank) {
    Matrix& ring = moments.ring_;
    const int64_t rows = moments.HeldRows(), oldest = moments.OldestRow();
    // As Deviations(): row r of the fit is ring row (oldest + r) mod rank; a rotation of rows.
    std::rotate(ring.data(), ring.data() + oldest * ring.cols(), ring.data() + ring.size());
    ring.conservativeResize(rows, ring.cols());
    fit.deviations = std::move(ring);
    assert(fit.deviations.rows() >= 2 && "kGaussianLowRank needs at least 2 deviations");
  }
  fit.mean = std::move(moments.mean_);
  moments.mean_.clear();
  moments.m2_.clear();
  moments.ring_.resize(0, 0);
  moments.count_ = moments.next_row_ = 0;
  return fit;
}

void DrawBasinSample(const BasinFit& fit, uint64_t seed, double scale, float* out) {
  assert(scale > 0);
  const size_t dim = fit.mean.size();
  if (fit.method == BasinMethod::kNone) {
    std::copy(fit.mean.begin(), fit.mean.end(), out);
    return;
  }
  assert(fit.variance.size() == dim);
  const bool low_rank = fit.method == BasinMethod::kGaussianLowRank;
  const double s = std::sqrt(scale);
  const double diag_factor = low_rank ? s * std::sqrt(0.5) : s;
  Philox rng(seed);
  // w_i = mean_i + c sqrt(var_i) z1_i, c = sqrt(scale) (diag) or sqrt(scale / 2) (low rank)
  for (size_t i = 0; i < dim; ++i) {
    const double sd = std::sqrt(static_cast<double>(fit.variance[i]));
    out[i] = static_cast<float>(fit.mean[i] + diag_factor * sd * rng.NextNormal());
  }
  if (!low_rank) return;
  const Eigen::Index rank = fit.deviations.rows();
  assert(rank >= 2 && fit.deviations.cols() == static_cast<Eigen::Index>(dim));
  const double low_rank_factor = s / std::sqrt(2.0 * static_cast<double>(rank - 1));
  Eigen::Map<Eigen::RowVectorXf> w(out, static_cast<Eigen::Index>(dim));
  // w += sqrt(scale) / sqrt(2 (R - 1)) sum_r z2_r D_r
  for (Eigen::Index r = 0; r < rank; ++r) {
    w += static_cast<float>(low_rank_factor * rng.NextNormal()) * fit.deviations.row(r);
  }
}

}  // namespace chorus

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

namespace {

Matrix ToFloat(const MatrixD& m) { return m.cast<float>(); }

std::vector<float> ToFloat(const Eigen::VectorXd& v) {
  std::vector<float> out(v.size());
  for (Eigen::Index i = 0; i < v.size(); ++i) out[i] = static_cast<float>(v[i]);
  return out;
}

Eigen::VectorXd ToDouble(const std::vector<float>& v) {
  Eigen::VectorXd out(v.size());
  for (size_t i = 0; i < v.size(); ++i) out[i] = v[i];
  return out;
}

bool Finite(const float* v, int64_t n) {
  return std::all_of(v, v + n, [](float x) { return std::isfinite(x); });
}

bool NonNegative(const std::vector<float>& v) {
  return std::all_of(v.begin(), v.end(), [](float x) { return std::isfinite(x) && x >= 0; });
}

bool Square(const Matrix& m, int64_t n) { return m.rows() == n && m.cols() == n; }

}  // namespace

Status CheckCollectedSamples(const BasinFit& fit, const std::vector<uint64_t>& seeds, const std::string& where) {
  const int64_t rows = fit.samples.rows();
  if (rows < 1 || fit.samples.cols() != static_cast<int64_t>(fit.mean.size()) || !fit.variance.empty() ||
      fit.deviations.size() != 0) {
    return Status::InvalidInput(where + ": collected samples: " + std::to_string(rows) + " x " +
                                std::to_string(fit.samples.cols()) + " for " + std::to_string(fit.mean.size()) +
                                " parameters");
  }
  for (uint64_t s : seeds) {
    if (s >= static_cast<uint64_t>(rows)) {
      return Status::InvalidInput(where + ": collected samples: sample " + std::to_string(s) + " of " +
                                  std::to_string(rows));
    }
  }
  if (!Finite(fit.samples.data(), fit.samples.size()) || !Finite(fit.mean.data(), static_cast<int64_t>(fit.mean.size()))) {
    return Status::InvalidInput(where + ": collected samples: expected finite values");
  }
  return Status::Ok();
}

const char* LaplaceFormName(LaplaceForm form) {
  return form == LaplaceForm::kFull ? "full" : "kronecker";
}

std::optional<LaplaceForm> ParseLaplaceForm(const std::string& name) {
  if (name == "full") return LaplaceForm::kFull;
  if (name == "kronecker") return LaplaceForm::kKronecker;
  return std::nullopt;
}

BasinFit LaplaceBasinFit(const LastLayerLaplace& laplace, std::vector<float> params) {
  BasinFit fit;
  fit.method = BasinMethod::kLaplaceLastLayer;
  fit.mean = std::move(params);
  LaplaceFactors& f = fit.laplace;
  f.form = laplace.form;
  f.outputs = static_cast<int>(laplace.theta_map.cols());
  f.prior_precision = laplace.prior_precision;
  if (laplace.form == LaplaceForm::kFull) {
    f.eigenvectors = ToFloat(laplace.eigenvectors);
    f.eigenvalues = ToFloat(laplace.eigenvalues);
  } else {
    f.eigenvectors = ToFloat(laplace.feature_eigenvectors);
    f.eigenvalues = ToFloat(laplace.feature_eigenvalues);
    f.output_eigenvectors = ToFloat(laplace.output_eigenvectors);
    f.output_eigenvalues = ToFloat(laplace.output_eigenvalues);
  }
  return fit;
}

LastLayerLaplace ToLastLayerLaplace(const BasinFit& fit) {
  const LaplaceFactors& f = fit.laplace;
  LastLayerLaplace l;
  l.form = f.form;
  l.task = f.outputs == 2 ? Task::kRegression : Task::kClassification;  // unused by sampling
  l.prior_precision = f.prior_precision;
  const int64_t p = f.form == LaplaceForm::kFull ? f.eigenvectors.rows()
                                                 : f.eigenvectors.rows() * f.outputs;
  l.theta_map.resize(p / f.outputs, f.outputs);
  const float* last = fit.mean.data() + (fit.mean.size() - static_cast<size_t>(p));
  for (int64_t i = 0; i < p; ++i) l.theta_map.data()[i] = last[i];
  if (f.form == LaplaceForm::kFull) {
    l.eigenvectors = f.eigenvectors.cast<double>();
    l.eigenvalues = ToDouble(f.eigenvalues);
  } else {
    l.feature_eigenvectors = f.eigenvectors.cast<double>();
    l.feature_eigenvalues = ToDouble(f.eigenvalues);
    l.output_eigenvectors = f.output_eigenvectors.cast<double>();
    l.output_eigenvalues = ToDouble(f.output_eigenvalues);
  }
  return l;
}

Status CheckLaplaceFactors(const BasinFit& fit, const std::string& where) {
  const LaplaceFactors& f = fit.laplace;
  const int64_t n = f.eigenvectors.rows(), k = f.outputs;
  const bool full = f.form == LaplaceForm::kFull;
  const int64_t p = full ? n : n * k;
  const bool shapes = k >= 2 && n >= 1 && Square(f.eigenvectors, n) &&
                      static_cast<int64_t>(f.eigenvalues.size()) == n &&
                      (full ? n % k == 0 && f.output_eigenvectors.size() == 0 && f.output_eigenvalues.empty()
                            : Square(f.output_eigenvectors, k) &&
                                  static_cast<int64_t>(f.output_eigenvalues.size()) == k) &&
                      p <= static_cast<int64_t>(fit.mean.size()) && fit.variance.empty() &&
                      fit.deviations.size() == 0;
  if (!shapes) {
    return Status::InvalidInput(where + ": laplace fit: eigenvectors " + std::to_string(n) + " x " +
                                std::to_string(f.eigenvectors.cols()) + " with " +
                                std::to_string(f.eigenvalues.size()) + " eigenvalues for " +
                                std::to_string(k) + " outputs do not describe the last layer of " +
                                std::to_string(fit.mean.size()) + " parameters");
  }
  const bool values = Finite(fit.mean.data(), static_cast<int64_t>(fit.mean.size())) &&
                      Finite(f.eigenvectors.data(), f.eigenvectors.size()) &&
                      Finite(f.output_eigenvectors.data(), f.output_eigenvectors.size()) &&
                      NonNegative(f.eigenvalues) && NonNegative(f.output_eigenvalues) &&
                      std::isfinite(f.prior_precision) && f.prior_precision > 0;
  if (!values) {
    return Status::InvalidInput(where + ": laplace fit: expected finite values, eigenvalues >= 0 "
                                "and a prior precision > 0");
  }
  return Status::Ok();
}

void DrawBasinSample(const BasinFit& fit, uint64_t seed, double scale, float* out) {
  assert(scale > 0);
  const size_t dim = fit.mean.size();
  if (fit.method == BasinMethod::kNone) {
    std::copy(fit.mean.begin(), fit.mean.end(), out);
    return;
  }
  if (fit.method == BasinMethod::kCyclicalSgmcmc) {
    assert(seed < static_cast<uint64_t>(fit.samples.rows()));
    std::copy(fit.samples.row(static_cast<Eigen::Index>(seed)).data(),
              fit.samples.row(static_cast<Eigen::Index>(seed)).data() + dim, out);
    return;
  }
  if (fit.method == BasinMethod::kLaplaceLastLayer) {
    DrawLastLayerSample(ToLastLayerLaplace(fit), fit.mean.data(), static_cast<int64_t>(dim), seed,
                        scale, out);
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

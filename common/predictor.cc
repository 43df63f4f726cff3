#include "common/predictor.h"

#include <cassert>
#include <cmath>

#include "common/assembly.h"
#include "common/basin_fit.h"
#include "common/evaluation.h"
#include "common/heads.h"
#include "common/member_training.h"
#include "common/uncertainty.h"

namespace chorus {
namespace {

std::vector<const Matrix*> Pointers(const std::vector<Matrix>& outputs) {
  std::vector<const Matrix*> pointers;
  for (const Matrix& m : outputs) pointers.push_back(&m);
  return pointers;
}

// Where component c comes from: a member and the index of one of its samples.
using Source = std::pair<const BundleMember*, int64_t>;

std::vector<Source> Sources(const Bundle& bundle) {
  std::vector<Source> sources;
  for (const BundleMember& m : bundle.members) {
    for (int64_t s = 0; s < m.Samples(); ++s) sources.emplace_back(&m, s);
  }
  return sources;
}

}  // namespace

Mlp BundleNetwork(const Bundle& bundle) {
  return Mlp(bundle.widths, bundle.activation,
             bundle.conv.empty() ? ConvFront() : ConvFront(bundle.image, bundle.conv, bundle.activation));
}

Predictor::Predictor(const Bundle& bundle)
    : net_(BundleNetwork(bundle)), temperature_(bundle.temperature) {
  target_units_.task = bundle.task;
  target_units_.target_mean = bundle.preprocessing.target_mean;
  target_units_.target_scale = bundle.preprocessing.target_scale;
}

StatusOr<Predictor> Predictor::Create(const Bundle& bundle, const ParallelFor* parallel,
                                      int64_t max_sample_bytes) {
  CHORUS_RETURN_IF_ERROR(CheckBundle(bundle, "bundle"));
  const int64_t parameters = BundleParameterCount(bundle);
  int64_t components = 0;
  for (const BundleMember& m : bundle.members) components += m.Samples();
  // components <= 1e9 and parameters <= 2^31, so the product fits in int64.
  if (components * parameters * int64_t{4} > max_sample_bytes) {
    return Status::InvalidInput("bundle: " + std::to_string(components) + " samples of " +
                                std::to_string(parameters) + " parameters need more than the " +
                                std::to_string(max_sample_bytes) + " bytes allowed");
  }
  Predictor p(bundle);
  const std::vector<Source> sources = Sources(bundle);
  for (const Source& source : sources) {
    const BundleMember& m = *source.first;
    p.component_weights_.push_back(m.weight / static_cast<double>(m.Samples()));
  }
  p.samples_.resize(sources.size());
  const auto draw = [&](int64_t c) {
    const auto [m, s] = sources[static_cast<size_t>(c)];
    std::vector<float>& w = p.samples_[static_cast<size_t>(c)];
    if (m->basin.method == BasinMethod::kNone) {
      w = m->parameters;
      return;
    }
    w.resize(static_cast<size_t>(parameters));
    DrawBasinSample(m->basin, m->sample_seeds[static_cast<size_t>(s)], bundle.basin_scale,
                    w.data());
  };
  ParallelForEach(parallel, components, draw);
  return p;
}

Matrix Predictor::ComponentOutputs(int64_t c, const ConstMatrixRef& x) const {
  return PredictOutputs(net_, samples_[static_cast<size_t>(c)].data(), x, kBatchRows);
}

void Predictor::ComponentOutputsInto(int64_t c, const ConstMatrixRef& x, Mlp::Workspace& ws,
                                     MatrixRef out) const {
  assert(out.rows() == x.rows() && out.cols() == Outputs());
  PredictOutputsInto(net_, samples_[static_cast<size_t>(c)].data(), x, kBatchRows, ws, out);
}

Prediction Predictor::Combine(const std::vector<Matrix>& outputs) const {
  Prediction p;
  if (task() == Task::kClassification) {
    p.classification = CombineClassification(outputs);
  } else {
    p.regression = CombineRegression(outputs);
  }
  return p;
}

Prediction Predictor::Predict(const ConstMatrixRef& x) const {
  Mlp::Workspace ws = MakeWorkspace();
  std::vector<Matrix> outputs(static_cast<size_t>(Components()), Matrix(x.rows(), Outputs()));
  for (int64_t c = 0; c < Components(); ++c) ComponentOutputsInto(c, x, ws, outputs[c]);
  return Combine(outputs);
}

// p = sum_c w_c softmax(z_c / T) (MixtureProbabilities); the entropy split is over the same
// tempered components (SplitEntropy), as the run's report computes it.
ClassPrediction Predictor::CombineClassification(const std::vector<Matrix>& outputs) const {
  ClassPrediction out;
  out.probabilities = MixtureProbabilities(Pointers(outputs), component_weights_, temperature_);
  std::vector<MatrixD> tempered;
  for (const Matrix& z : outputs) tempered.push_back(Softmax(z, temperature_));
  UncertaintySplit split = SplitEntropy(tempered, component_weights_);
  out.total_entropy = std::move(split.total);
  out.epistemic = std::move(split.epistemic);
  for (Eigen::Index i = 0; i < out.probabilities.rows(); ++i) {
    int32_t best = 0;
    for (int32_t k = 1; k < out.probabilities.cols(); ++k) {
      if (out.probabilities(i, k) > out.probabilities(i, best)) best = k;
    }
    out.predicted.push_back(best);
    out.confidence.push_back(out.probabilities(i, best));
  }
  return out;
}

// Each component's Gaussian in target units (ToGaussian), the mixture with stddev * T
// (MixtureGaussians), the law-of-total-variance split (SplitVariance) and quantiles
// (MixtureQuantile). The mean is summed in component order, as ScoreRegression sums it.
RegressionPrediction Predictor::CombineRegression(const std::vector<Matrix>& outputs) const {
  std::vector<MemberGaussian> gaussians;
  for (const Matrix& z : outputs) gaussians.push_back(ToGaussian(z, target_units_));
  std::vector<const MemberGaussian*> pointers;
  for (const MemberGaussian& g : gaussians) pointers.push_back(&g);
  RegressionPrediction out;
  out.mixture = MixtureGaussians(pointers, component_weights_, temperature_);
  const UncertaintySplit split = SplitVariance(out.mixture);
  for (Eigen::Index i = 0; i < out.mixture.mean.rows(); ++i) {
    double mean = 0;
    for (size_t c = 0; c < component_weights_.size(); ++c) {
      mean += component_weights_[c] * out.mixture.mean(i, static_cast<Eigen::Index>(c));
    }
    out.mean.push_back(mean);
    out.total_std.push_back(std::sqrt(split.total[i]));
    out.epistemic_std.push_back(std::sqrt(split.epistemic[i]));
    out.lower_5.push_back(MixtureQuantile(out.mixture, i, 0.05));
    out.upper_95.push_back(MixtureQuantile(out.mixture, i, 0.95));
  }
  return out;
}

}  // namespace chorus

#include "common/basin_scale.h"

#include <limits>

#include "common/assembly.h"
#include "common/evaluation.h"

namespace chorus {
namespace {

// Every member's samples at `scale`: outputs on `x`, member-major, sample order as the seeds.
std::vector<Matrix> SampleOutputs(const Mlp& net, const std::vector<MemberResult>& members,
                                  double scale, const ConstMatrixRef& x) {
  std::vector<Matrix> out;
  std::vector<float> w(net.ParameterCount());
  for (const MemberResult& m : members) {
    for (uint64_t seed : m.sample_seeds) {
      DrawBasinSample(m.basin, seed, scale, w.data());
      out.push_back(PredictOutputs(net, w.data(), x));
    }
  }
  return out;
}

// Validation NLL of the uniform mixture of all components at temperature 1.
double ValidationNll(const PreparedData& data, const std::vector<Matrix>& outputs) {
  const std::vector<double> uniform(outputs.size(), 1.0 / static_cast<double>(outputs.size()));
  if (data.task == Task::kClassification) {
    std::vector<const Matrix*> logits;
    for (const Matrix& z : outputs) logits.push_back(&z);
    return ScoreClassification(MixtureProbabilities(logits, uniform, 1.0), data.validation.labels, 1).nll;
  }
  std::vector<MemberGaussian> gaussians;
  for (const Matrix& z : outputs) gaussians.push_back(ToGaussian(z, data));
  std::vector<const MemberGaussian*> comps;
  for (const MemberGaussian& g : gaussians) comps.push_back(&g);
  std::vector<double> y(data.validation.targets.size());
  for (size_t i = 0; i < y.size(); ++i) {
    y[i] = static_cast<double>(data.validation.targets[i]) * data.target_scale + data.target_mean;
  }
  return MixtureNll(MixtureGaussians(comps, uniform, 1.0), y);
}

}  // namespace

const std::vector<double>& BasinScaleCandidates() {
  static const std::vector<double> kCandidates = {0.25, 0.5, 1.0, 2.0};
  return kCandidates;
}

double TuneBasinScale(const PreparedData& data, const Mlp& net, std::vector<MemberResult>& members) {
  double best_scale = 1.0, best_nll = std::numeric_limits<double>::infinity();
  for (double scale : BasinScaleCandidates()) {
    const double nll = ValidationNll(data, SampleOutputs(net, members, scale, data.validation.x));
    if (nll < best_nll) best_nll = nll, best_scale = scale;
  }
  std::vector<Matrix> val = SampleOutputs(net, members, best_scale, data.validation.x);
  std::vector<Matrix> test = SampleOutputs(net, members, best_scale, data.test.x);
  size_t c = 0;
  for (MemberResult& m : members) {
    for (size_t s = 0; s < m.sample_seeds.size(); ++s, ++c) {
      m.sample_validation_outputs[s] = std::move(val[c]);
      m.sample_test_outputs[s] = std::move(test[c]);
    }
  }
  return best_scale;
}

}  // namespace chorus

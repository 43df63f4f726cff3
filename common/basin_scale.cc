#include "common/basin_scale.h"

#include <limits>

#include "common/assembly.h"
#include "common/evaluation.h"
#include "common/folds.h"

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

// Every member's samples at `scale` on each fold's held-out rows, scattered back into training
// row order: member-major, sample order as the seeds.
std::vector<Matrix> OutOfFoldSampleOutputs(const Mlp& net, const std::vector<int>& fold_of_row,
                                           const std::vector<std::vector<const MemberResult*>>& folds,
                                           const std::vector<Split>& held_out, double scale) {
  std::vector<Matrix> out;
  std::vector<float> w(net.ParameterCount());
  for (const std::vector<const MemberResult*>& member_folds : folds) {
    for (size_t s = 0; s < member_folds[0]->sample_seeds.size(); ++s) {
      std::vector<Matrix> per_fold;
      for (size_t k = 0; k < member_folds.size(); ++k) {
        DrawBasinSample(member_folds[k]->basin, member_folds[k]->sample_seeds[s], scale, w.data());
        per_fold.push_back(PredictOutputs(net, w.data(), held_out[k].x));
      }
      std::vector<const Matrix*> parts;
      for (const Matrix& m : per_fold) parts.push_back(&m);
      out.push_back(ScatterByFold(fold_of_row, parts));
    }
  }
  return out;
}

// Validation NLL of the uniform mixture of all components at temperature 1.
double ValidationNll(const PreparedData& data, const Split& validation, const std::vector<Matrix>& outputs) {
  const std::vector<double> uniform(outputs.size(), 1.0 / static_cast<double>(outputs.size()));
  if (data.task == Task::kClassification) {
    std::vector<const Matrix*> logits;
    for (const Matrix& z : outputs) logits.push_back(&z);
    return ScoreClassification(MixtureProbabilities(logits, uniform, 1.0), validation.labels, 1).nll;
  }
  std::vector<MemberGaussian> gaussians;
  for (const Matrix& z : outputs) gaussians.push_back(ToGaussian(z, data));
  std::vector<const MemberGaussian*> comps;
  for (const MemberGaussian& g : gaussians) comps.push_back(&g);
  std::vector<double> y(validation.targets.size());
  for (size_t i = 0; i < y.size(); ++i) {
    y[i] = static_cast<double>(validation.targets[i]) * data.target_scale + data.target_mean;
  }
  return MixtureNll(MixtureGaussians(comps, uniform, 1.0), y);
}

// The candidate whose outputs (outputs_at(scale)) give the lowest validation NLL.
template <typename OutputsAt>
double BestScale(const PreparedData& data, const Split& validation, const OutputsAt& outputs_at) {
  double best_scale = 1.0, best_nll = std::numeric_limits<double>::infinity();
  for (double scale : BasinScaleCandidates()) {
    const double nll = ValidationNll(data, validation, outputs_at(scale));
    if (nll < best_nll) best_nll = nll, best_scale = scale;
  }
  return best_scale;
}

}  // namespace

const std::vector<double>& BasinScaleCandidates() {
  static const std::vector<double> kCandidates = {0.25, 0.5, 1.0, 2.0};
  return kCandidates;
}

namespace {

// Rewrites members' sample outputs: validation from `val` (member-major), test redrawn at scale.
void AdoptSamples(const Mlp& net, const PreparedData& data, double scale, std::vector<Matrix> val,
                  std::vector<MemberResult>& members) {
  std::vector<Matrix> test = SampleOutputs(net, members, scale, data.test.x);
  size_t c = 0;
  for (MemberResult& m : members) {
    for (size_t s = 0; s < m.sample_seeds.size(); ++s, ++c) {
      m.sample_validation_outputs[s] = std::move(val[c]);
      m.sample_test_outputs[s] = std::move(test[c]);
    }
  }
}

}  // namespace

double TuneBasinScale(const PreparedData& data, const Mlp& net, std::vector<MemberResult>& members) {
  auto outputs_at = [&](double scale) { return SampleOutputs(net, members, scale, data.validation.x); };
  const double best = BestScale(data, data.validation, outputs_at);
  AdoptSamples(net, data, best, outputs_at(best), members);
  return best;
}

double TuneBasinScaleOutOfFold(const PreparedData& data, const Mlp& net, const std::vector<int>& fold_of_row,
                               const std::vector<std::vector<const MemberResult*>>& folds,
                               std::vector<MemberResult>& members) {
  std::vector<Split> held_out;
  for (int k = 0; k < data.folds; ++k) held_out.push_back(SelectRows(data.train, RowsOfFold(fold_of_row, k).held_out));
  auto outputs_at = [&](double scale) {
    return OutOfFoldSampleOutputs(net, fold_of_row, folds, held_out, scale);
  };
  const double best = BestScale(data, data.train, outputs_at);
  AdoptSamples(net, data, best, outputs_at(best), members);
  return best;
}

}  // namespace chorus

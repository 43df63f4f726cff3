// The ensemble's predictive distribution for new inputs, built from a bundle: every member's
// weight samples (re-drawn from its basin fit with the stored seeds, so they equal the run's),
// each sample's network outputs, and the weighted, temperature-scaled mixture with its
// uncertainty split — the same functions the run used to score its test split (common/assembly.h,
// common/uncertainty.h, common/evaluation.h's ToGaussian), so predictions on the run's own test
// rows reproduce its report exactly.
//
// Components: the samples of every member, member-major (member 0's samples in seed order, then
// member 1's, ...); sample s of member m has weight w_m / S_m.
// Thread safety: a Predictor is immutable after Create; every method is const and may run on
// many threads at once.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/matrix.h"
#include "common/metrics.h"
#include "common/mlp.h"
#include "common/parallel_for.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Per input row, classification.
struct ClassPrediction {
  MatrixD probabilities;              // rows x classes, calibrated mixture; rows sum to 1
  std::vector<int32_t> predicted;     // arg max of the row (ties: lowest index)
  std::vector<double> confidence;     // the row's largest probability
  std::vector<double> total_entropy;  // H[p], nats
  std::vector<double> epistemic;      // mutual information between prediction and component, nats
};

// Per input row, regression, in the target's original units.
struct RegressionPrediction {
  GaussianMixture mixture;            // one component per sample, stddev multiplied by T
  std::vector<double> mean;           // sum_c w_c mu_c
  std::vector<double> total_std;      // sqrt(aleatoric + epistemic variance)
  std::vector<double> epistemic_std;  // sqrt(sum_c w_c (mu_c - mean)^2)
  std::vector<double> lower_5;        // the mixture's 5% quantile
  std::vector<double> upper_95;       // the mixture's 95% quantile
};

// The task's half is filled; the other is empty.
struct Prediction {
  ClassPrediction classification;
  RegressionPrediction regression;
};

// The network of a bundle that CheckBundle accepted.
Mlp BundleNetwork(const Bundle& bundle);

class Predictor {
 public:
  // Rows per forward pass. The run computed its outputs in batches of this size from row 0
  // (PredictOutputs' default); Eigen's products may round a row differently inside batches of
  // another size, so callers that must reproduce the run feed rows in the same batches.
  static constexpr int64_t kBatchRows = 1024;
  static constexpr int64_t kDefaultMaxSampleBytes = int64_t{8} << 30;

  // Checks the bundle (CheckBundle) and draws every sample (through `parallel`, null: on this
  // thread; each sample is a pure function of its fit and seed, so threads change nothing). Memory:
  // components x parameters x 4 bytes, refused with kInvalidInput (before allocating) above
  // max_sample_bytes.
  static StatusOr<Predictor> Create(const Bundle& bundle, const ParallelFor* parallel = nullptr,
                                    int64_t max_sample_bytes = kDefaultMaxSampleBytes);

  Task task() const { return target_units_.task; }
  int64_t Features() const { return net_.Inputs(); }
  int64_t Components() const { return static_cast<int64_t>(samples_.size()); }

  // Network outputs of component c (0 <= c < Components()) for standardised features x
  // (rows x Features()): rows x outputs, logits or (mean, log-variance) of the standardised
  // target, computed in batches of kBatchRows from row 0. Uses only the calling thread.
  Matrix ComponentOutputs(int64_t c, const ConstMatrixRef& x) const;

  // The drawn weights of component c (ParameterCount() floats, common/mlp.h layout), its
  // mixture weight w_m / S_m, the network and the temperature: what an export that rebuilds the
  // predictive in another format needs (coordinator/onnx_export.h).
  const std::vector<float>& ComponentParameters(int64_t c) const { return samples_[static_cast<size_t>(c)]; }
  double ComponentWeight(int64_t c) const { return component_weights_[static_cast<size_t>(c)]; }
  const Mlp& network() const { return net_; }
  double temperature() const { return temperature_; }

  // Activations for forward passes of up to kBatchRows rows, for ComponentOutputsInto. Allocated
  // once; one per thread.
  Mlp::Workspace MakeWorkspace() const { return net_.MakeWorkspace(kBatchRows); }
  int64_t Outputs() const { return net_.widths().back(); }

  // ComponentOutputs(c, x), bit for bit, written into `out` (x.rows() x Outputs(), the caller's)
  // with the activations in `ws` (from MakeWorkspace): allocates nothing, so a caller that keeps
  // `out` and `ws` from batch to batch runs at the matrix products' speed.
  void ComponentOutputsInto(int64_t c, const ConstMatrixRef& x, Mlp::Workspace& ws,
                            MatrixRef out) const;

  // The calibrated predictive from every component's outputs on the same rows (outputs[c] from
  // ComponentOutputs(c, x)). Requires outputs.size() == Components().
  Prediction Combine(const std::vector<Matrix>& outputs) const;

  // ComponentOutputs for every component, then Combine, on the calling thread.
  Prediction Predict(const ConstMatrixRef& x) const;

 private:
  explicit Predictor(const Bundle& bundle);

  ClassPrediction CombineClassification(const std::vector<Matrix>& outputs) const;
  RegressionPrediction CombineRegression(const std::vector<Matrix>& outputs) const;

  Mlp net_;
  double temperature_;
  // Only task, target_mean and target_scale are set: the units ToGaussian maps outputs into.
  PreparedData target_units_;
  std::vector<std::vector<float>> samples_;  // one weight vector per component
  std::vector<double> component_weights_;    // w_m / S_m per component, summing to 1
};

}  // namespace chorus

// Training one ensemble member from scratch: seeded initialisation, shuffled minibatch SGD, then
// the member's outputs on validation and test. A pure function of (spec, data): the same inputs
// give bit-identical results on the same instruction set, whatever thread runs it.
// Thread safety: reentrant; uses only the calling thread. `data` is read-only and may be shared.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <vector>

#include "common/basin_fit.h"
#include "common/config.h"
#include "common/dataset.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/status.h"
#include "common/training_step.h"

namespace chorus {

struct MemberSpec {
  int index = 0;       // position in the ensemble, 0-based
  uint64_t seed = 0;   // Derive(run.seed, index); initialisation and shuffling derive from it
  ModelConfig model;
  TrainConfig train;
  BasinConfig basin;   // method none: no basin phase, the member is its own single sample
};

struct EpochProgress {
  int member = 0;
  int epoch = 0;       // 1-based, the epoch just finished (basin epochs count on after training)
  int epochs = 0;      // training epochs plus basin epochs
  double mean_loss = 0;  // mean training loss over the epoch's minibatches
};
using ProgressFn = std::function<void(const EpochProgress&)>;

struct MemberResult {
  int index = 0;
  uint64_t seed = 0;
  std::vector<float> parameters;   // Mlp layout (common/mlp.h)
  std::vector<double> epoch_loss;  // mean training loss per epoch
  Matrix validation_outputs;       // rows x outputs: logits, or (mean, log-variance) standardised
  Matrix test_outputs;             // (of the trained point, before any basin phase)
  // With a basin fit: the fit, each sample's seed, and each sample's outputs (same layout as
  // above). Without one, all empty: the member is its own single sample.
  BasinFit basin;
  std::vector<uint64_t> sample_seeds;
  std::vector<Matrix> sample_validation_outputs;
  std::vector<Matrix> sample_test_outputs;

  // The member's samples' outputs on a split: the basin samples, or the trained point alone.
  std::vector<const Matrix*> ValidationSamples() const;
  std::vector<const Matrix*> TestSamples() const;
};

// The seed of sample s of a member: Derive(Derive(member_seed, "basin_sample"), s).
uint64_t BasinSampleSeed(uint64_t member_seed, int sample);

// The network a config describes for this data: inputs = features, outputs = classes
// (classification) or 2 (regression: mean and log-variance of the standardised target).
Mlp NetworkFor(const ModelConfig& model, const PreparedData& data);

// Trains member `spec.index` (then, with spec.basin.method != none, continues SGD at basin.lr
// collecting snapshots, fits the basin and predicts with every sample). Fails with kDiverged ("epoch E, step S: training loss is nan") if a
// minibatch loss or a final output is not finite. `progress` (may be empty) is called after each
// epoch from the calling thread. If `cancel` (may be null) becomes true, training stops at the
// next epoch boundary with kCancelled. With spec.train.parts > 1 the parts of each minibatch run
// through `parallel` (null: one after another on the calling thread); the result is the same.
StatusOr<MemberResult> TrainMember(const MemberSpec& spec, const PreparedData& data,
                                   const ProgressFn& progress,
                                   const std::atomic<bool>* cancel = nullptr,
                                   const ParallelFor* parallel = nullptr);

// Network outputs for every row of x, computed in batches of `batch_rows` to bound memory.
Matrix PredictOutputs(const Mlp& net, const float* params, const ConstMatrixRef& x,
                      int64_t batch_rows = 1024);
// The same into the caller's buffers, allocating nothing: out is x.rows() x outputs, ws holds
// activations for at least batch_rows rows.
void PredictOutputsInto(const Mlp& net, const float* params, const ConstMatrixRef& x,
                        int64_t batch_rows, Mlp::Workspace& ws, MatrixRef out);

}  // namespace chorus

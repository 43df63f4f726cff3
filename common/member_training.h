// Training one ensemble member from scratch: seeded initialisation, shuffled minibatch SGD, then
// the member's outputs on validation and test. A pure function of (spec, data): the same inputs
// give bit-identical results on the same instruction set, whatever thread runs it.
// Thread safety: reentrant; uses only the calling thread. `data` is read-only and may be shared.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "common/basin_fit.h"
#include "common/config.h"
#include "common/matrix.h"
#include "common/mlp.h"
#include "common/parallel_for.h"
#include "common/prepared_data.h"
#include "common/status.h"
#include "common/training_step.h"

namespace chorus {

// What a job is for. A member of the ensemble; one fold of a member (cross-fitting: it trains
// without fold `fold` and predicts that fold, so the member has out-of-fold predictions for every
// training row); or one point of the search grid (common/config.h SearchConfig).
enum class JobRole { kMember, kFold, kSearch };
const char* JobRoleName(JobRole role);
std::optional<JobRole> ParseJobRole(const std::string& name);  // nullopt for an unknown name

struct MemberSpec {
  int index = 0;       // position in the ensemble, 0-based (search: the member whose seed it uses)
  uint64_t seed = 0;   // Derive(run.seed, index); initialisation and shuffling derive from it
  ModelConfig model;
  TrainConfig train;   // train.early_stopping.mode is resolved to on or off
  BasinConfig basin;   // method none: no basin phase, the member is its own single sample
  JobRole role = JobRole::kMember;
  int point = 0;       // search: the grid point
  int fold = -1;       // the fold held out, in [0, folds); -1: train on the whole training split
  int folds = 0;       // folds of the assignment (common/folds.h AssignFolds); >= 2 with a fold
  uint64_t fold_seed = 0;  // the assignment's seed
  int stop_epoch = 0;  // > 0: stop after this many epochs of the train.epochs-long schedule
};

// The job's name, unique in a run and used as its directory under jobs/: "3" (member 3),
// "fold-3-1" (member 3 without fold 1), "fold-3-1-at-12" (the same replayed to epoch 12),
// "search-2" or "search-2-1" (grid point 2, fold 1).
std::string JobName(const MemberSpec& spec);

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
  JobRole role = JobRole::kMember;
  int point = 0;                   // as in the spec
  int fold = -1;                   // as in the spec
  std::vector<float> parameters;   // Mlp layout (common/mlp.h)
  std::vector<double> epoch_loss;  // mean training loss per epoch
  // Mean validation NLL of the network after each training epoch (nats; regression on the
  // standardised target); empty when the job has no validation rows.
  std::vector<double> validation_nll;
  int best_epoch = 0;              // 1-based epoch whose parameters were kept
  // Outputs on the validation rows (the holdout or file; a fold job: its held-out fold, rows in
  // ascending order) and on test: rows x outputs, logits or (mean, log-variance) standardised.
  // Of the kept parameters, before any basin phase.
  Matrix validation_outputs;
  Matrix test_outputs;
  // With a basin fit: the fit, each sample's seed, and each sample's outputs (same layout as
  // above). Without one, all empty: the member is its own single sample.
  BasinFit basin;
  std::vector<uint64_t> sample_seeds;
  std::vector<Matrix> sample_validation_outputs;
  std::vector<Matrix> sample_test_outputs;
  // CPU-seconds this job spent (common/cpu_account.h: its own thread and its ParallelFor items):
  // training = the SGD epochs, their validation NLL and the trained point's outputs (cyclical
  // SG-MCMC: the whole run, its sampling phases included); basin_fit = the basin phase or the
  // Laplace curvature and prior tuning (0 without a fit); samples = drawing every sample and
  // computing its outputs.
  struct CpuSeconds {
    double training = 0, basin_fit = 0, samples = 0;
  } cpu_seconds;

  // The member's samples' outputs on a split: the basin samples, or the trained point alone.
  std::vector<const Matrix*> ValidationSamples() const;
  std::vector<const Matrix*> TestSamples() const;
};

// The seed of sample s of a member: Derive(Derive(member_seed, "basin_sample"), s).
uint64_t BasinSampleSeed(uint64_t member_seed, int sample);

// The network a config describes for this data: inputs = features, outputs = classes
// (classification) or 2 (regression: mean and log-variance of the standardised target).
// Requires CheckModelForData(model, data) to pass.
Mlp NetworkFor(const ModelConfig& model, const PreparedData& data);

// Whether the model's convolution stages fit the data: without stages, always; with them, the
// image shape must be valid for them and hold exactly the data's features. kInvalidInput naming
// `where` (a config path such as "model.image") otherwise.
Status CheckModelForData(const ModelConfig& model, int64_t features, const std::string& where);

// Trains member `spec.index` on the training split (a fold job: on the rows outside its fold),
// measuring the validation NLL after every epoch; with early stopping on, stops after `patience`
// epochs without a new best and keeps the best epoch's parameters; with stop_epoch, stops there.
// Then, with spec.basin.method != none, continues SGD at basin.lr from the kept parameters
// (momentum reset) collecting snapshots, fits the basin and predicts with every sample. Fails with kDiverged ("epoch E, step S: training loss is nan") if a
// minibatch loss or a final output is not finite. `progress` (may be empty) is called after each
// epoch from the calling thread. If `cancel` (may be null) becomes true, training stops at the
// next epoch boundary with kCancelled. With spec.train.parts > 1 the parts of each minibatch run
// through `parallel` (null: one after another on the calling thread); the result is the same.
StatusOr<MemberResult> TrainMember(const MemberSpec& spec, const PreparedData& data,
                                   const ProgressFn& progress,
                                   const std::atomic<bool>* cancel = nullptr,
                                   const ParallelFor* parallel = nullptr);

// Network outputs for every row of x, computed in batches of `batch_rows` to bound memory, each
// batch's products cut across `parallel`'s threads (the same bits on any: common/mlp.h).
constexpr int64_t kPredictionBatchRows = 1024;
Matrix PredictOutputs(const Mlp& net, const float* params, const ConstMatrixRef& x,
                      int64_t batch_rows = kPredictionBatchRows, const ParallelFor* parallel = nullptr);
// The same into the caller's buffers, allocating nothing: out is x.rows() x outputs, ws holds
// activations for at least batch_rows rows.
void PredictOutputsInto(const Mlp& net, const float* params, const ConstMatrixRef& x,
                        int64_t batch_rows, Mlp::Workspace& ws, MatrixRef out,
                        const ParallelFor* parallel = nullptr);

}  // namespace chorus

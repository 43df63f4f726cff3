#include "common/member_training.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <string>
#include <utility>

#include "common/cpu_account.h"
#include "common/folds.h"
#include "common/heads.h"
#include "common/rng.h"
#include "common/sgd.h"
#include "common/sgmcmc_step.h"

namespace chorus {
namespace {

// Fisher-Yates from the identity, so epoch e's order depends only on (seed, e).
void ShuffleForEpoch(uint64_t seed, int epoch, std::vector<int64_t>& order) {
  std::iota(order.begin(), order.end(), int64_t{0});
  Philox rng(Derive(Derive(seed, "shuffle"), static_cast<uint64_t>(epoch)));
  for (int64_t i = static_cast<int64_t>(order.size()) - 1; i > 0; --i) {
    std::swap(order[i], order[rng.NextBelow(static_cast<uint64_t>(i) + 1)]);
  }
}

// The rows a job trains and validates on: all of train and the validation split, or for a fold
// job the rows outside its fold and the fold itself.
struct JobRows {
  std::vector<int64_t> train;   // indices into data.train
  Split held_out;               // a fold job's validation rows (empty otherwise)
  const Split* validation = nullptr;
};

JobRows RowsForJob(const MemberSpec& spec, const PreparedData& data) {
  JobRows rows;
  if (spec.fold < 0) {
    rows.train.resize(static_cast<size_t>(data.train.rows()));
    std::iota(rows.train.begin(), rows.train.end(), int64_t{0});
    rows.validation = &data.validation;
    return rows;
  }
  FoldRows f = RowsOfFold(AssignFolds(data.train, spec.folds, spec.fold_seed), spec.fold);
  rows.train = std::move(f.train);
  rows.held_out = SelectRows(data.train, f.held_out);
  return rows;
}

// A warm start's starting weights for the job's member (train.start_points), or null.
const std::vector<float>* StartPoint(const MemberSpec& spec) {
  const auto& points = spec.train.start_points;
  if (points.empty()) return nullptr;
  return points[static_cast<size_t>(spec.index) % points.size()].get();
}

// State of one member's SGD run over the rows `rows` of the training split; buffers are
// allocated once.
class SgdRun {
 public:
  SgdRun(const MemberSpec& spec, const PreparedData& data, std::vector<int64_t> rows,
         const ParallelFor* parallel)
      : spec_(spec), data_(data), rows_(std::move(rows)), parallel_(parallel),
        net_(NetworkFor(spec.model, data)),
        batch_(std::min<int64_t>(spec.train.batch_size, static_cast<int64_t>(rows_.size()))),
        params_(net_.ParameterCount()),
        step_(net_, data.task, spec.train.optimizer, batch_,
              static_cast<int>(std::min<int64_t>(spec.train.parts, batch_)),
              static_cast<float>(spec.train.beta_nll), spec.train.products),
        xb_(batch_, data.features()), labels_(batch_), targets_(batch_), order_(rows_.size()) {
    if (const std::vector<float>* start = StartPoint(spec)) {
      std::copy(start->begin(), start->end(), params_.begin());
    } else {
      net_.Initialize(Derive(spec.seed, "init"), params_.data());
    }
  }

  // One epoch over the shuffled training rows at the learning rate lr_at(step) (step counts from
  // the start of this epoch); calls after_step(step) after each update. Returns the mean loss.
  template <typename LrFn, typename AfterStepFn>
  StatusOr<double> Epoch(int epoch, const LrFn& lr_at, const AfterStepFn& after_step) {
    return EpochOfSteps(
        epoch,
        [&](const ConstMatrixRef& x, int64_t step) {
          return step_.Run(x, labels_.data(), targets_.data(), static_cast<float>(lr_at(step)),
                           params_.data(), parallel_);
        },
        after_step);
  }

  // The same with the minibatch gradient handed to update(context, grad, params) instead of the
  // SGD step (TrainingStep::RunWithUpdate); set_step(step) is called before each.
  template <typename SetStepFn, typename AfterStepFn>
  StatusOr<double> EpochWithUpdate(int epoch, const SetStepFn& set_step, TrainingStep::GradientUpdate update,
                                   void* context, const AfterStepFn& after_step) {
    return EpochOfSteps(
        epoch,
        [&](const ConstMatrixRef& x, int64_t step) {
          set_step(step);
          return step_.RunWithUpdate(x, labels_.data(), targets_.data(), params_.data(), parallel_,
                                     update, context);
        },
        after_step);
  }

  int64_t StepsPerEpoch() const { return (static_cast<int64_t>(rows_.size()) + batch_ - 1) / batch_; }
  // The rows of the training split this run trains on, ascending.
  const std::vector<int64_t>& rows() const { return rows_; }
  const Mlp& net() const { return net_; }
  const ParallelFor* parallel() const { return parallel_; }
  std::vector<float>& params() { return params_; }
  // Continues from `params` (an earlier epoch's), with the momentum zeroed.
  void Restore(const std::vector<float>& params) {
    params_ = params;
    step_.ResetMomentum();
  }

 private:
  // One epoch over the shuffled training rows, one run_step(minibatch, step) per minibatch (step
  // counts from the start of this epoch; it returns the minibatch loss), after_step(step) after
  // each. Returns the mean loss.
  template <typename StepFn, typename AfterStepFn>
  StatusOr<double> EpochOfSteps(int epoch, const StepFn& run_step, const AfterStepFn& after_step) {
    ShuffleForEpoch(spec_.seed, epoch, order_);
    const int64_t n = static_cast<int64_t>(rows_.size());
    double loss_sum = 0.0;
    int64_t steps = 0;
    for (int64_t start = 0; start < n; start += batch_, ++steps) {
      const int64_t rows = std::min(batch_, n - start);
      Gather(start, rows);
      const double loss = run_step(xb_.topRows(rows), steps);
      if (!std::isfinite(loss)) {
        return Status::Diverged("epoch " + std::to_string(epoch + 1) + ", step " +
                                std::to_string(steps + 1) + ": training loss is " + std::to_string(loss));
      }
      loss_sum += loss;
      after_step(steps);
    }
    return loss_sum / static_cast<double>(steps);
  }

  // The minibatch's rows, in blocks across the job's threads (the blocks the products take).
  void Gather(int64_t start, int64_t rows) {
    const bool classify = data_.task == Task::kClassification;
    const int64_t blocks = std::min<int64_t>(ThreadsOf(parallel_), rows);
    ParallelForEach(blocks > 1 ? parallel_ : nullptr, blocks, [&](int64_t b) {
      for (int64_t r = b * rows / blocks; r < (b + 1) * rows / blocks; ++r) {
        const int64_t src = rows_[order_[start + r]];
        xb_.row(r) = data_.train.x.row(src);
        if (classify) labels_[r] = data_.train.labels[src];
        else targets_[r] = data_.train.targets[src];
      }
    });
  }

  const MemberSpec& spec_;
  const PreparedData& data_;
  const std::vector<int64_t> rows_;
  const ParallelFor* parallel_;
  Mlp net_;
  int64_t batch_;
  std::vector<float> params_;
  TrainingStep step_;
  Matrix xb_;
  std::vector<int32_t> labels_;
  std::vector<float> targets_;
  std::vector<int64_t> order_;
};

// Mean NLL of the network's outputs on `split` (classification: softmax cross-entropy;
// regression: Gaussian NLL of the standardised target).
double SplitNll(const Mlp& net, const float* params, const Split& split, const ParallelFor* parallel) {
  const Matrix out = PredictOutputs(net, params, split.x, kPredictionBatchRows, parallel);
  return split.labels.empty() ? GaussianNllValue(out, split.targets.data())
                              : SoftmaxCrossEntropyValue(out, split.labels.data());
}

}  // namespace

Mlp NetworkFor(const ModelConfig& model, const PreparedData& data) {
  ConvFront front;
  if (!model.conv.empty()) front = ConvFront(model.image, model.conv, model.activation);
  std::vector<int> widths = {static_cast<int>(front.empty() ? data.features() : front.Outputs())};
  widths.insert(widths.end(), model.hidden.begin(), model.hidden.end());
  widths.push_back(data.task == Task::kClassification ? static_cast<int>(data.classes()) : 2);
  return Mlp(widths, model.activation, std::move(front));
}

Status CheckModelForData(const ModelConfig& model, int64_t features, const std::string& where) {
  if (model.conv.empty()) return Status::Ok();
  const std::string problem = CheckConvStages(model.image, model.conv);
  if (!problem.empty()) return Status::InvalidInput(where + ": " + problem);
  if (model.image.size() != features) {
    const ImageShape& i = model.image;
    return Status::InvalidInput(where + ": image " + std::to_string(i.channels) + " x " +
                                std::to_string(i.height) + " x " + std::to_string(i.width) + " holds " +
                                std::to_string(i.size()) + " values per row, but the data has " +
                                std::to_string(features) + " features");
  }
  if (ConvFront(model.image, model.conv, model.activation).Outputs() > 65536) {
    return Status::InvalidInput(where + ": the last convolution stage gives more than 65536 features; pool more");
  }
  return Status::Ok();
}

Matrix PredictOutputs(const Mlp& net, const float* params, const ConstMatrixRef& x,
                      int64_t batch_rows, const ParallelFor* parallel) {
  Matrix out(x.rows(), net.widths().back());
  Mlp::Workspace ws = net.MakeWorkspace(std::min<int64_t>(batch_rows, std::max<int64_t>(x.rows(), 1)));
  PredictOutputsInto(net, params, x, batch_rows, ws, out, parallel);
  return out;
}

void PredictOutputsInto(const Mlp& net, const float* params, const ConstMatrixRef& x,
                        int64_t batch_rows, Mlp::Workspace& ws, MatrixRef out,
                        const ParallelFor* parallel) {
  for (int64_t start = 0; start < x.rows(); start += batch_rows) {
    const int64_t rows = std::min(batch_rows, x.rows() - start);
    out.middleRows(start, rows) = net.Forward(params, x.middleRows(start, rows), ws, parallel);
  }
}

std::vector<const Matrix*> MemberResult::ValidationSamples() const {
  if (sample_validation_outputs.empty()) return {&validation_outputs};
  std::vector<const Matrix*> out;
  for (const Matrix& m : sample_validation_outputs) out.push_back(&m);
  return out;
}

std::vector<const Matrix*> MemberResult::TestSamples() const {
  if (sample_test_outputs.empty()) return {&test_outputs};
  std::vector<const Matrix*> out;
  for (const Matrix& m : sample_test_outputs) out.push_back(&m);
  return out;
}

uint64_t BasinSampleSeed(uint64_t member_seed, int sample) {
  return Derive(Derive(member_seed, "basin_sample"), static_cast<uint64_t>(sample));
}

namespace {

// Continues SGD at the constant basin rate, adding snapshot j (j = 0..K-1) after global basin step
// floor((j + 1) * T / K) - 1 of T steps, then fits the basin.
Status RunBasinPhase(const MemberSpec& spec, SgdRun& run, const ProgressFn& progress,
                     const std::atomic<bool>* cancel, MemberResult& result) {
  const BasinConfig& b = spec.basin;
  const int64_t per_epoch = run.StepsPerEpoch(), total = per_epoch * b.epochs;
  SnapshotMoments moments(run.net().ParameterCount(), b.method == BasinMethod::kGaussianLowRank ? b.rank : 0);
  int next_snapshot = 0;
  auto snapshot_step = [&](int j) { return (int64_t{j} + 1) * total / b.snapshots - 1; };
  for (int e = 0; e < b.epochs; ++e) {
    const int64_t base = per_epoch * e;
    auto after_step = [&](int64_t step) {
      while (next_snapshot < b.snapshots && snapshot_step(next_snapshot) == base + step) {
        moments.Add(run.params().data());
        ++next_snapshot;
      }
    };
    StatusOr<double> loss = run.Epoch(spec.train.epochs + e, [&](int64_t) { return b.lr; }, after_step);
    if (!loss.ok()) return loss.status().WithContext("basin phase");
    result.epoch_loss.push_back(loss.value());
    const int epochs = spec.train.epochs + b.epochs;
    if (progress) progress({spec.index, spec.train.epochs + e + 1, epochs, loss.value()});
    if (cancel != nullptr && cancel->load()) return Status::Cancelled("stopped on request");
  }
  result.basin = FitBasin(std::move(moments), b.method);
  return Status::Ok();
}

// The training loss of the last layer's outputs F = Phi Theta (N x K) summed over the rows
// (common/heads.h's mean losses times N): -log p(rows | Theta) up to a constant.
double SummedNll(Task task, const MatrixD& outputs, const Split& rows) {
  const Matrix f = outputs.cast<float>();
  const double mean = task == Task::kClassification ? SoftmaxCrossEntropyValue(f, rows.labels.data())
                                                    : GaussianNllValue(f, rows.targets.data());
  return mean * static_cast<double>(f.rows());
}

// The last-layer Laplace fit at the trained point, from the curvature of the loss over the job's
// training rows; the prior precision as configured, or tuned: on the job's validation rows, or
// without any (a member of a cross-fitted run) by the Laplace evidence of its training rows.
Status FitLaplace(const MemberSpec& spec, SgdRun& run, const PreparedData& data,
                  const Split& validation, MemberResult& result) {
  const Mlp& net = run.net();
  const float* params = run.params().data();
  const bool all_rows = static_cast<int64_t>(run.rows().size()) == data.train.rows();
  const Split subset = all_rows ? Split{} : SelectRows(data.train, run.rows());
  CHORUS_ASSIGN_OR_RETURN(const Matrix features,
                          LastHiddenFeatures(net, params, all_rows ? data.train.x : subset.x));
  const MatrixD theta = LastLayerWeights(net, params);
  const int64_t last_layer = theta.size();
  const LaplaceHessian h = spec.basin.hessian;
  const LaplaceForm form = h == LaplaceHessian::kFull ||
                                   (h == LaplaceHessian::kAuto && last_layer <= kMaxExactLaplaceParameters)
                               ? LaplaceForm::kFull
                               : LaplaceForm::kKronecker;
  const bool tune = spec.basin.prior_precision == 0;
  CHORUS_ASSIGN_OR_RETURN(LastLayerLaplace laplace,
                          FitLastLayerLaplace(data.task, form, features, theta,
                                              tune ? 1.0 : spec.basin.prior_precision));
  if (tune && validation.rows() == 0) {
    const MatrixD outputs = LastLayerOutputs(features, theta);
    laplace.prior_precision = PriorPrecisionByEvidence(laplace, SummedNll(data.task, outputs, all_rows ? data.train : subset));
  } else if (tune) {
    CHORUS_ASSIGN_OR_RETURN(const Matrix validation_features, LastHiddenFeatures(net, params, validation.x));
    StatusOr<double> chosen = data.task == Task::kClassification
                                  ? TunePriorPrecision(laplace, validation_features, validation.labels)
                                  : TunePriorPrecision(laplace, validation_features, validation.targets);
    if (!chosen.ok()) return chosen.status();
    laplace.prior_precision = chosen.value();
  }
  result.basin = LaplaceBasinFit(laplace, run.params());
  return Status::Ok();
}

// Every basin sample's outputs on the job's validation rows and on test: basin.samples samples
// from seeds BasinSampleSeed, or for cyclical SG-MCMC every collected one (seed = row).
void PredictSamples(const MemberSpec& spec, const Mlp& net, const Split& validation,
                    const PreparedData& data, const ParallelFor* parallel, MemberResult& result) {
  std::vector<float> w(net.ParameterCount());
  const bool collected = spec.basin.method == BasinMethod::kCyclicalSgmcmc;
  const int64_t samples = collected ? result.basin.samples.rows() : spec.basin.samples;
  for (int64_t s = 0; s < samples; ++s) {
    const uint64_t seed = collected ? static_cast<uint64_t>(s) : BasinSampleSeed(spec.seed, static_cast<int>(s));
    DrawBasinSample(result.basin, seed, spec.basin.scale, w.data());
    result.sample_seeds.push_back(seed);
    result.sample_validation_outputs.push_back(
        PredictOutputs(net, w.data(), validation.x, kPredictionBatchRows, parallel));
    result.sample_test_outputs.push_back(PredictOutputs(net, w.data(), data.test.x, kPredictionBatchRows, parallel));
  }
}

bool AllFinite(const MemberResult& r) {
  if (!r.validation_outputs.allFinite() || !r.test_outputs.allFinite()) return false;
  for (const Matrix& m : r.sample_validation_outputs) if (!m.allFinite()) return false;
  for (const Matrix& m : r.sample_test_outputs) if (!m.allFinite()) return false;
  return true;
}

// The training epochs with early stopping: tracks the validation NLL after every epoch, keeps the
// best epoch's parameters when early stopping is on and restores them at the end.
Status TrainEpochs(const MemberSpec& spec, SgdRun& run, const Split& validation,
                   const ProgressFn& progress, const std::atomic<bool>* cancel, int all_epochs,
                   MemberResult& result) {
  const bool watch = validation.rows() > 0;
  const bool early = watch && spec.train.early_stopping.mode == Switch::kOn;
  const int epochs = spec.stop_epoch > 0 ? std::min(spec.stop_epoch, spec.train.epochs) : spec.train.epochs;
  const int64_t per_epoch = run.StepsPerEpoch();
  double best = std::numeric_limits<double>::infinity();
  std::vector<float> best_params;
  for (int epoch = 0; epoch < epochs; ++epoch) {
    auto lr_at = [&](int64_t step) {
      return ScheduledLearningRate(spec.train, per_epoch * epoch + step, per_epoch);
    };
    StatusOr<double> loss = run.Epoch(epoch, lr_at, [](int64_t) {});
    if (!loss.ok()) return loss.status();
    result.epoch_loss.push_back(loss.value());
    if (progress) progress({spec.index, epoch + 1, all_epochs, loss.value()});
    if (cancel != nullptr && cancel->load()) return Status::Cancelled("stopped on request");
    if (!watch) continue;
    const double nll = SplitNll(run.net(), run.params().data(), validation, run.parallel());
    result.validation_nll.push_back(nll);
    if (nll < best) {
      best = nll;
      result.best_epoch = epoch + 1;
      if (early) best_params = run.params();
    } else if (early && epoch + 1 - result.best_epoch >= spec.train.early_stopping.patience) {
      break;
    }
  }
  const int ran = static_cast<int>(result.epoch_loss.size());
  if (early && result.best_epoch > 0 && result.best_epoch < ran) run.Restore(best_params);
  if (!early || result.best_epoch == 0) result.best_epoch = ran;
  return Status::Ok();
}

// Cyclical SG-MCMC's update of the parameters from one minibatch gradient: the planned step
// (common/sgmcmc_step.h) and the SGHMC velocity it carries from step to step.
struct CyclicalUpdate {
  SgmcmcStep step;
  std::vector<float> velocity;
  static void Apply(void* context, const float* grad, float* params) {
    CyclicalUpdate& u = *static_cast<CyclicalUpdate*>(context);
    SgmcmcEntries(u.step, 0, grad, params, u.velocity.data(), static_cast<int64_t>(u.velocity.size()));
  }
};

// The training epochs under cyclical SG-MCMC: train.epochs x steps-per-epoch steps cut into
// basin.sgmcmc.cycles cycles, the weights copied into `collected` after every sample step
// (IsSampleStep). Validation NLL is recorded after every epoch; nothing stops early.
Status TrainCyclical(const MemberSpec& spec, SgdRun& run, const Split& validation, const ProgressFn& progress,
                     const std::atomic<bool>* cancel, MemberResult& result, Matrix& collected) {
  const SgmcmcConfig& config = spec.basin.sgmcmc;
  const int64_t per_epoch = run.StepsPerEpoch();
  const CyclicalSchedule schedule = CyclicalScheduleFor(config, per_epoch * spec.train.epochs);
  CHORUS_RETURN_IF_ERROR(ValidateCyclicalSchedule(schedule).WithContext(
      "basin (cyclical_sgmcmc over " + std::to_string(schedule.total_steps) + " steps)"));
  const int64_t dim = run.net().ParameterCount();
  collected.resize(SampleCount(schedule), dim);
  CyclicalUpdate update{{}, std::vector<float>(static_cast<size_t>(dim), 0.0f)};
  const uint64_t noise_seed = Derive(spec.seed, "sgmcmc_noise");
  const int64_t train_rows = static_cast<int64_t>(run.rows().size());
  int64_t taken = 0;
  for (int epoch = 0; epoch < spec.train.epochs; ++epoch) {
    const int64_t base = per_epoch * epoch;
    auto set_step = [&](int64_t step) {
      update.step = PlanSgmcmcStep(config, schedule, spec.train.optimizer.lr, spec.train.optimizer.weight_decay,
                                   train_rows, noise_seed, base + step);
    };
    auto after_step = [&](int64_t step) {
      if (!IsSampleStep(schedule, base + step)) return;
      collected.row(taken++) = Eigen::Map<const Eigen::RowVectorXf>(run.params().data(), dim);
    };
    StatusOr<double> loss = run.EpochWithUpdate(epoch, set_step, &CyclicalUpdate::Apply, &update, after_step);
    if (!loss.ok()) return loss.status();
    result.epoch_loss.push_back(loss.value());
    if (progress) progress({spec.index, epoch + 1, spec.train.epochs, loss.value()});
    if (cancel != nullptr && cancel->load()) return Status::Cancelled("stopped on request");
    if (validation.rows() > 0) {
      result.validation_nll.push_back(SplitNll(run.net(), run.params().data(), validation, run.parallel()));
    }
  }
  result.best_epoch = spec.train.epochs;
  return Status::Ok();
}

}  // namespace

const char* JobRoleName(JobRole role) {
  switch (role) {
    case JobRole::kMember: return "member";
    case JobRole::kFold: return "fold";
    case JobRole::kSearch: return "search";
  }
  return "?";
}

std::optional<JobRole> ParseJobRole(const std::string& name) {
  for (JobRole role : {JobRole::kMember, JobRole::kFold, JobRole::kSearch}) {
    if (name == JobRoleName(role)) return role;
  }
  return std::nullopt;
}

std::string JobName(const MemberSpec& spec) {
  const std::string fold = spec.fold >= 0 ? "-" + std::to_string(spec.fold) : "";
  switch (spec.role) {
    case JobRole::kMember: return std::to_string(spec.index);
    case JobRole::kFold:
      return "fold-" + std::to_string(spec.index) + fold +
             (spec.stop_epoch > 0 ? "-at-" + std::to_string(spec.stop_epoch) : "");
    case JobRole::kSearch: return "search-" + std::to_string(spec.point) + fold;
  }
  return "?";
}

StatusOr<MemberResult> TrainMember(const MemberSpec& spec, const PreparedData& data,
                                   const ProgressFn& progress, const std::atomic<bool>* cancel,
                                   const ParallelFor* parallel) {
  const std::string where = (spec.role == JobRole::kMember ? "member " : "job ") + JobName(spec);
  if (data.train.rows() == 0) return Status::InvalidInput(where + ": no training rows");
  CHORUS_RETURN_IF_ERROR(CheckModelForData(spec.model, data.features(), where + ": model"));
  JobRows rows = RowsForJob(spec, data);
  if (rows.train.empty()) return Status::InvalidInput(where + ": no training rows outside the fold");
  if (const std::vector<float>* start = StartPoint(spec)) {
    const int64_t weights = NetworkFor(spec.model, data).ParameterCount();
    if (static_cast<int64_t>(start->size()) != weights) {
      return Status::InvalidInput(where + ": the warm start holds " + std::to_string(start->size()) +
                                  " weights, the network " + std::to_string(weights));
    }
  }
  const Split& validation = rows.validation != nullptr ? *rows.validation : rows.held_out;
  CpuAccount cpu(parallel);
  SgdRun run(spec, data, std::move(rows.train), cpu.parallel());
  MemberResult result;
  result.index = spec.index;
  result.seed = spec.seed;
  result.role = spec.role;
  result.point = spec.point;
  result.fold = spec.fold;
  const bool basin = spec.basin.method != BasinMethod::kNone;
  const bool laplace = spec.basin.method == BasinMethod::kLaplaceLastLayer;
  const bool cyclical = spec.basin.method == BasinMethod::kCyclicalSgmcmc;
  const int all_epochs = spec.train.epochs + (basin && !laplace && !cyclical ? spec.basin.epochs : 0);
  Matrix collected;
  if (cyclical) {
    CHORUS_RETURN_IF_ERROR(
        TrainCyclical(spec, run, validation, progress, cancel, result, collected).WithContext(where));
  } else {
    CHORUS_RETURN_IF_ERROR(
        TrainEpochs(spec, run, validation, progress, cancel, all_epochs, result).WithContext(where));
  }
  result.validation_outputs =
      PredictOutputs(run.net(), run.params().data(), validation.x, kPredictionBatchRows, run.parallel());
  result.test_outputs = PredictOutputs(run.net(), run.params().data(), data.test.x, kPredictionBatchRows,
                                       run.parallel());
  result.parameters = run.params();
  result.cpu_seconds.training = cpu.Seconds();
  if (cyclical) {
    result.basin.method = BasinMethod::kCyclicalSgmcmc;
    result.basin.mean = result.parameters;
    result.basin.samples = std::move(collected);
  } else if (laplace) {
    CHORUS_RETURN_IF_ERROR(FitLaplace(spec, run, data, validation, result).WithContext(where));
  } else if (basin) {
    CHORUS_RETURN_IF_ERROR(RunBasinPhase(spec, run, progress, cancel, result).WithContext(where));
  }
  // A member without a fit records none (not the noise of two clock reads).
  if (cyclical || laplace || basin) {
    result.cpu_seconds.basin_fit = cpu.Seconds() - result.cpu_seconds.training;
  }
  if (basin) {
    PredictSamples(spec, run.net(), validation, data, run.parallel(), result);
    result.cpu_seconds.samples = cpu.Seconds() - result.cpu_seconds.training - result.cpu_seconds.basin_fit;
  }
  if (!AllFinite(result)) return Status::Diverged(where + ": a prediction is not finite");
  return result;
}

}  // namespace chorus

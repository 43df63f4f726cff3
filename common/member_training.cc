#include "common/member_training.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <string>

#include "common/heads.h"
#include "common/rng.h"
#include "common/sgd.h"

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

// State of one member's SGD run; buffers are allocated once.
class SgdRun {
 public:
  SgdRun(const MemberSpec& spec, const PreparedData& data)
      : spec_(spec), data_(data), net_(NetworkFor(spec.model, data)),
        batch_(std::min<int64_t>(spec.train.batch_size, data.train.rows())),
        params_(net_.ParameterCount()), grad_(net_.ParameterCount()),
        velocity_(net_.ParameterCount(), 0.0f), ws_(net_.MakeWorkspace(batch_)),
        xb_(batch_, data.features()), grad_out_(batch_, net_.widths().back()),
        labels_(batch_), targets_(batch_), order_(data.train.rows()) {
    net_.Initialize(Derive(spec.seed, "init"), params_.data());
  }

  // One epoch over the shuffled training rows; returns the mean minibatch loss.
  StatusOr<double> Epoch(int epoch) {
    ShuffleForEpoch(spec_.seed, epoch, order_);
    const int64_t n = data_.train.rows();
    const int64_t steps_per_epoch = (n + batch_ - 1) / batch_;
    double loss_sum = 0.0;
    for (int64_t start = 0, s = 0; start < n; start += batch_, ++s) {
      const int64_t rows = std::min(batch_, n - start);
      Gather(start, rows);
      const double loss = Step(rows, spec_.train.optimizer, steps_per_epoch * epoch + s, steps_per_epoch);
      if (!std::isfinite(loss)) {
        return Status::Diverged("epoch " + std::to_string(epoch + 1) + ", step " +
                                std::to_string(s + 1) + ": training loss is " + std::to_string(loss));
      }
      loss_sum += loss;
    }
    return loss_sum / static_cast<double>(steps_per_epoch);
  }

  const Mlp& net() const { return net_; }
  std::vector<float>& params() { return params_; }

 private:
  void Gather(int64_t start, int64_t rows) {
    const bool classify = data_.task == Task::kClassification;
    for (int64_t r = 0; r < rows; ++r) {
      const int64_t src = order_[start + r];
      xb_.row(r) = data_.train.x.row(src);
      if (classify) labels_[r] = data_.train.labels[src];
      else targets_[r] = data_.train.targets[src];
    }
  }

  double Step(int64_t rows, const OptimizerConfig& opt, int64_t step, int64_t steps_per_epoch) {
    auto x = xb_.topRows(rows);
    auto out = net_.Forward(params_.data(), x, ws_);
    auto g_out = grad_out_.topRows(rows);
    const double loss = data_.task == Task::kClassification
                            ? SoftmaxCrossEntropy(out, labels_.data(), g_out)
                            : GaussianNll(out, targets_.data(), g_out);
    if (!std::isfinite(loss)) return loss;
    net_.Backward(params_.data(), x, g_out, ws_, grad_.data());
    const int64_t p = net_.ParameterCount();
    ClipGradientNorm(grad_.data(), p, opt.clip_norm);
    const double lr = ScheduledLearningRate(spec_.train, step, steps_per_epoch);
    SgdStep(opt, static_cast<float>(lr), p, grad_.data(), params_.data(), velocity_.data());
    return loss;
  }

  const MemberSpec& spec_;
  const PreparedData& data_;
  Mlp net_;
  int64_t batch_;
  std::vector<float> params_, grad_, velocity_;
  Mlp::Workspace ws_;
  Matrix xb_, grad_out_;
  std::vector<int32_t> labels_;
  std::vector<float> targets_;
  std::vector<int64_t> order_;
};

}  // namespace

Mlp NetworkFor(const ModelConfig& model, const PreparedData& data) {
  std::vector<int> widths = {static_cast<int>(data.features())};
  widths.insert(widths.end(), model.hidden.begin(), model.hidden.end());
  widths.push_back(data.task == Task::kClassification ? static_cast<int>(data.classes()) : 2);
  return Mlp(widths, model.activation);
}

Matrix PredictOutputs(const Mlp& net, const float* params, const ConstMatrixRef& x,
                      int64_t batch_rows) {
  Matrix out(x.rows(), net.widths().back());
  Mlp::Workspace ws = net.MakeWorkspace(std::min<int64_t>(batch_rows, std::max<int64_t>(x.rows(), 1)));
  for (int64_t start = 0; start < x.rows(); start += batch_rows) {
    const int64_t rows = std::min(batch_rows, x.rows() - start);
    out.middleRows(start, rows) = net.Forward(params, x.middleRows(start, rows), ws);
  }
  return out;
}

StatusOr<MemberResult> TrainMember(const MemberSpec& spec, const PreparedData& data,
                                   const ProgressFn& progress) {
  const std::string where = "member " + std::to_string(spec.index);
  if (data.train.rows() == 0) return Status::InvalidInput(where + ": no training rows");
  SgdRun run(spec, data);
  MemberResult result;
  result.index = spec.index;
  result.seed = spec.seed;
  for (int epoch = 0; epoch < spec.train.epochs; ++epoch) {
    StatusOr<double> loss = run.Epoch(epoch);
    if (!loss.ok()) return loss.status().WithContext(where);
    result.epoch_loss.push_back(loss.value());
    if (progress) progress({spec.index, epoch + 1, spec.train.epochs, loss.value()});
  }
  result.validation_outputs = PredictOutputs(run.net(), run.params().data(), data.validation.x);
  result.test_outputs = PredictOutputs(run.net(), run.params().data(), data.test.x);
  if (!result.validation_outputs.allFinite() || !result.test_outputs.allFinite()) {
    return Status::Diverged(where + ": a prediction is not finite");
  }
  result.parameters = std::move(run.params());
  return result;
}

}  // namespace chorus

#include "common/mlp_posterior.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <string>

#include "common/heads.h"

namespace chorus {
namespace {

Status CheckData(const Mlp& net, Task task, const Split& data) {
  const int64_t rows = data.rows(), outputs = net.widths().back();
  if (rows < 1) return Status::InvalidInput("the data set has no rows");
  if (data.x.cols() != net.Inputs()) {
    return Status::InvalidInput("the data has " + std::to_string(data.x.cols()) +
                                " features, the network " + std::to_string(net.Inputs()) +
                                " inputs");
  }
  if (task == Task::kRegression) {
    if (outputs != 2) return Status::InvalidInput("regression needs 2 network outputs (mean, log-variance)");
    if (static_cast<int64_t>(data.targets.size()) != rows)
      return Status::InvalidInput("regression needs one target per row");
    return Status::Ok();
  }
  if (outputs < 2) return Status::InvalidInput("classification needs >= 2 network outputs");
  if (static_cast<int64_t>(data.labels.size()) != rows)
    return Status::InvalidInput("classification needs one label per row");
  for (int64_t i = 0; i < rows; ++i) {
    if (data.labels[i] < 0 || data.labels[i] >= outputs)
      return Status::InvalidInput("label " + std::to_string(data.labels[i]) + " of row " +
                                  std::to_string(i) + " is not in [0, " + std::to_string(outputs) + ")");
  }
  return Status::Ok();
}

}  // namespace

StatusOr<MlpLogPosterior> MlpLogPosterior::Create(const Mlp& net, Task task, const Split& data,
                                                  double prior_variance, int64_t chunk_rows) {
  CHORUS_RETURN_IF_ERROR(CheckData(net, task, data).WithContext("mlp posterior"));
  if (!(prior_variance > 0) || !std::isfinite(prior_variance))
    return Status::InvalidInput("mlp posterior: prior_variance must be a positive number");
  if (chunk_rows < 1) return Status::InvalidInput("mlp posterior: chunk_rows must be >= 1");
  return MlpLogPosterior(net, task, data, prior_variance, std::min(chunk_rows, data.rows()));
}

MlpLogPosterior::MlpLogPosterior(const Mlp& net, Task task, const Split& data,
                                 double prior_variance, int64_t chunk_rows)
    : net_(&net), task_(task), data_(&data), prior_variance_(prior_variance),
      workspace_(net.MakeWorkspace(chunk_rows)), output_grad_(chunk_rows, net.widths().back()),
      params_(net.ParameterCount()), param_grad_(net.ParameterCount()) {}

double MlpLogPosterior::AddChunk(int64_t first, int64_t rows, std::vector<double>& grad) {
  const ConstMatrixRef x = data_->x.middleRows(first, rows);
  const MatrixRef out = net_->Forward(params_.data(), x, workspace_);
  auto out_grad = output_grad_.topRows(rows);
  // batch_rows = 1: the heads return the sum of the rows' NLLs and its unscaled gradient.
  const double nll = task_ == Task::kClassification
                         ? SoftmaxCrossEntropy(out, data_->labels.data() + first, out_grad, 1)
                         : GaussianNll(out, data_->targets.data() + first, out_grad, 1);
  net_->Backward(params_.data(), x, out_grad, workspace_, param_grad_.data());
  for (size_t i = 0; i < grad.size(); ++i) grad[i] -= param_grad_[i];
  return -nll;
}

double MlpLogPosterior::operator()(const std::vector<double>& theta, std::vector<double>& grad) {
  assert(static_cast<int64_t>(theta.size()) == ParameterCount());
  // log prior = -|theta|^2 / (2 v);  d/dtheta = -theta / v
  grad.resize(theta.size());
  double log_density = 0.0;
  for (size_t i = 0; i < theta.size(); ++i) {
    params_[i] = static_cast<float>(theta[i]);
    grad[i] = -theta[i] / prior_variance_;
    log_density -= 0.5 * theta[i] * theta[i] / prior_variance_;
  }
  const int64_t rows = data_->rows(), chunk = output_grad_.rows();
  for (int64_t first = 0; first < rows; first += chunk)
    log_density += AddChunk(first, std::min(chunk, rows - first), grad);
  return log_density;
}

MatrixD PosteriorPredictive(const Mlp& net, Task task, const std::vector<MatrixD>& draws,
                            const ConstMatrixRef& x, int64_t chunk_rows) {
  const int64_t rows = x.rows(), outputs = net.widths().back();
  assert(x.cols() == net.Inputs() && chunk_rows >= 1);
  assert(task == Task::kClassification || outputs == 2);
  Mlp::Workspace ws = net.MakeWorkspace(std::min(chunk_rows, std::max<int64_t>(rows, 1)));
  std::vector<float> params(net.ParameterCount());
  // classification: the sum of probabilities; regression: columns (running mean of mu, running
  // sum of squared deviations of mu (Welford), sum of e^s).
  MatrixD acc = MatrixD::Zero(rows, task == Task::kClassification ? outputs : 3);
  int64_t count = 0;
  for (const MatrixD& chain : draws) {
    assert(chain.cols() == net.ParameterCount());
    for (Eigen::Index s = 0; s < chain.rows(); ++s) {
      ++count;
      for (size_t i = 0; i < params.size(); ++i) params[i] = static_cast<float>(chain(s, i));
      for (int64_t first = 0; first < rows; first += chunk_rows) {
        const int64_t n = std::min(chunk_rows, rows - first);
        const MatrixRef out = net.Forward(params.data(), x.middleRows(first, n), ws);
        if (task == Task::kClassification) {
          acc.middleRows(first, n) += Softmax(out);
          continue;
        }
        for (int64_t r = 0; r < n; ++r) {
          double* a = acc.row(first + r).data();
          const double mu = out(r, 0), delta = mu - a[0];
          a[0] += delta / static_cast<double>(count);
          a[1] += delta * (mu - a[0]);
          a[2] += std::exp(static_cast<double>(out(r, 1)));
        }
      }
    }
  }
  assert(count >= 1);
  if (task == Task::kClassification) return acc / static_cast<double>(count);
  MatrixD moments(rows, 2);
  moments.col(0) = acc.col(0);
  moments.col(1) = (acc.col(1) + acc.col(2)) / static_cast<double>(count);
  return moments;
}

}  // namespace chorus

#include "common/hmc_reference.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <string>

#include "common/heads.h"
#include "common/mcmc_diagnostics.h"
#include "common/mlp_posterior.h"

namespace chorus {
namespace {

Status CheckInputs(const Mlp& net, Task task, const ConstMatrixRef& test_x,
                   const std::vector<std::vector<double>>& starts, const HmcConfig& hmc) {
  if (task != Task::kClassification)
    return Status::InvalidInput("the HMC reference predictive is for classification only, not regression");
  if (test_x.rows() < 1) return Status::InvalidInput("there are no test rows");
  if (test_x.cols() != net.Inputs()) {
    return Status::InvalidInput("the test rows have " + std::to_string(test_x.cols()) +
                                " features, the network " + std::to_string(net.Inputs()) +
                                " inputs");
  }
  if (hmc.chains < 1) return Status::InvalidInput("hmc.chains must be >= 1");
  if (hmc.thinning < 1 || hmc.draws / hmc.thinning < 4) {
    return Status::InvalidInput("hmc.draws / hmc.thinning must leave >= 4 kept draws per chain "
                                "(the split diagnostics' minimum)");
  }
  if (starts.size() != 1 && starts.size() != static_cast<size_t>(hmc.chains)) {
    return Status::InvalidInput(std::to_string(starts.size()) + " starts for " +
                                std::to_string(hmc.chains) + " chains (give one, or one per chain)");
  }
  for (size_t i = 0; i < starts.size(); ++i) {
    if (static_cast<int64_t>(starts[i].size()) != net.ParameterCount()) {
      return Status::InvalidInput("start " + std::to_string(i) + " has " +
                                  std::to_string(starts[i].size()) + " entries, the network " +
                                  std::to_string(net.ParameterCount()) + " parameters");
    }
  }
  const double values = static_cast<double>(hmc.chains) * (hmc.draws / hmc.thinning) *
                        static_cast<double>(test_x.rows()) * net.widths().back();
  if (values > static_cast<double>(kMaxHmcReferenceSeriesValues)) {
    return Status::InvalidInput("chains x kept draws x test rows x classes is " +
                                std::to_string(values) + ", above the limit of " +
                                std::to_string(kMaxHmcReferenceSeriesValues) +
                                " (thin more, or use fewer test rows)");
  }
  return Status::Ok();
}

// Row s is softmax(network at draws row s) on x, rows x classes flattened row-major. Runs x in
// chunks of MlpLogPosterior::kDefaultChunkRows rows, as PosteriorPredictive does.
MatrixD ProbabilitySeries(const Mlp& net, const MatrixD& draws, const ConstMatrixRef& x) {
  const int64_t rows = x.rows(), classes = net.widths().back();
  const int64_t chunk = std::min(MlpLogPosterior::kDefaultChunkRows, rows);
  Mlp::Workspace ws = net.MakeWorkspace(chunk);
  std::vector<float> params(static_cast<size_t>(net.ParameterCount()));
  MatrixD series(draws.rows(), rows * classes);
  for (Eigen::Index s = 0; s < draws.rows(); ++s) {
    for (size_t i = 0; i < params.size(); ++i) params[i] = static_cast<float>(draws(s, i));
    for (int64_t first = 0; first < rows; first += chunk) {
      const int64_t n = std::min(chunk, rows - first);
      const MatrixD p = Softmax(net.Forward(params.data(), x.middleRows(first, n), ws));
      series.row(s).segment(first * classes, n * classes) =
          Eigen::Map<const Eigen::RowVectorXd>(p.data(), n * classes);
    }
  }
  return series;
}

// What one chain leaves behind; chain c writes only slot c.
struct ChainOutput {
  Status status;
  MatrixD series;  // kept draws x (rows * classes), as ProbabilitySeries
  double mean_accept_probability = 0;
  int64_t divergences = 0;
};

// The largest rank-normalised R-hat and smallest bulk ESS over the columns of the series that are
// not constant, NaN counting as the worst (as SummarizeDraws); NaN for both when all are constant.
void Diagnose(const std::vector<ChainOutput>& chains, HmcReference& reference) {
  const Eigen::Index kept = chains.front().series.rows(), columns = chains.front().series.cols();
  reference.max_r_hat = -std::numeric_limits<double>::infinity();
  reference.min_ess = std::numeric_limits<double>::infinity();
  bool any = false;
  MatrixD series(static_cast<Eigen::Index>(chains.size()), kept);  // chains x iterations
  for (Eigen::Index j = 0; j < columns; ++j) {
    for (size_t c = 0; c < chains.size(); ++c)
      series.row(static_cast<Eigen::Index>(c)) = chains[c].series.col(j).transpose();
    if ((series.array() == series(0, 0)).all()) continue;
    any = true;
    const double r_hat = RankNormalizedRhat(series), ess = BulkEss(series);
    if (!(r_hat <= reference.max_r_hat) && !std::isnan(reference.max_r_hat)) reference.max_r_hat = r_hat;
    if (!(ess >= reference.min_ess) && !std::isnan(reference.min_ess)) reference.min_ess = ess;
  }
  if (!any) reference.max_r_hat = reference.min_ess = std::numeric_limits<double>::quiet_NaN();
}

}  // namespace

StatusOr<HmcReference> RunHmcReference(const Mlp& net, Task task, const Split& train,
                                       const ConstMatrixRef& test_x,
                                       const std::vector<std::vector<double>>& starts,
                                       const HmcReferenceConfig& config, const ParallelFor* parallel,
                                       const HmcProgressFunction& progress) {
  const HmcConfig& hmc = config.hmc;
  CHORUS_RETURN_IF_ERROR(CheckInputs(net, task, test_x, starts, hmc).WithContext("hmc reference"));
  CHORUS_ASSIGN_OR_RETURN(const MlpLogPosterior posterior,
                          MlpLogPosterior::Create(net, task, train, config.prior_variance));
  std::vector<ChainOutput> chains(static_cast<size_t>(hmc.chains));
  ParallelForEach(parallel, hmc.chains, [&](int64_t c) {
    MlpLogPosterior target = posterior;  // this chain's own scratch
    ChainOutput& out = chains[static_cast<size_t>(c)];
    StatusOr<HmcChain> chain = RunHmcChain(std::ref(target), starts[starts.size() == 1 ? 0 : c],
                                           hmc, static_cast<int>(c), progress);
    if (!chain.ok()) {
      out.status = chain.status();
      return;
    }
    out.series = ProbabilitySeries(net, chain.value().draws, test_x);
    out.mean_accept_probability = chain.value().mean_accept_probability;
    out.divergences = chain.value().divergences;
  });
  HmcReference reference;
  Eigen::RowVectorXd sum = Eigen::RowVectorXd::Zero(chains.front().series.cols());
  for (const ChainOutput& chain : chains) {  // in chain order, whichever thread ran it
    CHORUS_RETURN_IF_ERROR(chain.status.WithContext("hmc reference"));
    for (Eigen::Index s = 0; s < chain.series.rows(); ++s) sum += chain.series.row(s);
    reference.mean_accept_probability += chain.mean_accept_probability / hmc.chains;
    reference.divergences += chain.divergences;
    reference.draws += chain.series.rows();
  }
  sum /= static_cast<double>(reference.draws);
  reference.predictive = Eigen::Map<const MatrixD>(sum.data(), test_x.rows(), net.widths().back());
  Diagnose(chains, reference);
  return reference;
}

StatusOr<PredictiveAgreement> ComparePredictives(const MatrixD& reference, const MatrixD& candidate) {
  const Eigen::Index rows = reference.rows(), classes = reference.cols();
  if (candidate.rows() != rows || candidate.cols() != classes || rows < 1 || classes < 1) {
    return Status::InvalidInput(
        "compare predictives: the reference is " + std::to_string(rows) + " x " +
        std::to_string(classes) + ", the candidate " + std::to_string(candidate.rows()) + " x " +
        std::to_string(candidate.cols()) + " (they need one shape, at least 1 x 1)");
  }
  // agreement = (1/n) sum_i [argmax_k p_ik == argmax_k q_ik];  TV = (1/n) sum_i 0.5 |p_i - q_i|_1
  int64_t agreeing = 0;
  double total_variation = 0.0;
  for (Eigen::Index i = 0; i < rows; ++i) {
    const double* p = reference.row(i).data();
    const double* q = candidate.row(i).data();
    agreeing += (std::max_element(p, p + classes) - p) == (std::max_element(q, q + classes) - q);
    total_variation += 0.5 * (reference.row(i) - candidate.row(i)).cwiseAbs().sum();
  }
  PredictiveAgreement agreement;
  agreement.top1_agreement = static_cast<double>(agreeing) / static_cast<double>(rows);
  agreement.mean_total_variation = total_variation / static_cast<double>(rows);
  return agreement;
}

}  // namespace chorus

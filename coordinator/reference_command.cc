#include "coordinator/reference_command.h"

#include <tbb/task_arena.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/dataset.h"
#include "common/file_util.h"
#include "common/hmc_reference.h"
#include "common/log_format.h"
#include "common/metrics.h"
#include "common/mlp_posterior.h"
#include "common/predictor.h"
#include "coordinator/config_loader.h"
#include "coordinator/report_files.h"
#include "execution/tbb_parallel_for.h"
#include "proto/bundle_codec.h"
#include "report/report_model.h"

namespace chorus {
namespace {

using json = nlohmann::json;

// Izmailov et al. 2021 take a trajectory of pi/2 prior standard deviations (from memory): a
// quarter of the period of the prior's own Hamiltonian orbit.
constexpr double kTrajectoryPriorStddevs = M_PI / 2;
constexpr int kEceBins = 15;
// Vehtari et al. 2021 recommend rank-normalised split R-hat below 1.01 before trusting draws.
constexpr double kRhatLimit = 1.01;

struct Compared {
  std::string name;
  MatrixD probabilities;
};

// A member's point: its trained weights, or with a basin fit the fit's mean (for last-layer Laplace
// and cyclical SG-MCMC the trained weights too; for the Gaussian fits the snapshots' mean).
const std::vector<float>& MemberPoint(const BundleMember& m) {
  return m.basin.method == BasinMethod::kNone ? m.parameters : m.basin.mean;
}

// The members' points as HMC-style draws (one row each): `first` .. `first + count`.
MatrixD MemberPoints(const Bundle& bundle, size_t first, size_t count) {
  MatrixD draws(static_cast<Eigen::Index>(count), static_cast<Eigen::Index>(MemberPoint(bundle.members[first]).size()));
  for (size_t m = 0; m < count; ++m) {
    const std::vector<float>& p = MemberPoint(bundle.members[first + m]);
    for (size_t j = 0; j < p.size(); ++j) draws(static_cast<Eigen::Index>(m), static_cast<Eigen::Index>(j)) = p[j];
  }
  return draws;
}

// `report`: the run's report.json, read once by the caller (which rewrites it with the result).
StatusOr<json> Reference(const ReferenceOptions& o, const json& report) {
  const std::string& run = o.run_dir;
  CHORUS_ASSIGN_OR_RETURN(const Config config, LoadConfigFile(run + "/config.yaml"));
  CHORUS_ASSIGN_OR_RETURN(const BundleFile file, ReadBundleFile(run + "/bundle.chorus"));
  const Bundle& bundle = file.bundle;
  if (bundle.task != Task::kClassification) {
    return Status::InvalidInput(run + ": a regression run; the HMC reference compares class predictions only");
  }
  const Mlp net = BundleNetwork(bundle);
  if (net.ParameterCount() > o.max_parameters) {
    return Status::InvalidInput(run + ": the network has " + std::to_string(net.ParameterCount()) +
                                " parameters, more than --max-parameters " + std::to_string(o.max_parameters) +
                                " (full-batch HMC is a reference for small networks)");
  }
  CHORUS_ASSIGN_OR_RETURN(const PreparedData data, LoadPreparedData(config.data, config.run.seed));
  if (data.hash != bundle.data_hash) {
    return Status::InvalidInput(run + ": the data files have changed since the run (data hash " +
                                data.hash.substr(0, 12) + ", the run's " + bundle.data_hash.substr(0, 12) + ")");
  }
  double prior_variance = o.prior_variance;
  if (prior_variance <= 0) {
    // SGD's weight decay lambda on the mean loss is the Gaussian prior of precision N lambda.
    const double decay = report.value("settings", json::object()).value("weight_decay", config.train.optimizer.weight_decay);
    if (decay <= 0) return Status::InvalidInput(run + ": the run had no weight decay to set the prior from; give --prior-variance");
    prior_variance = 1.0 / (static_cast<double>(data.train.rows()) * decay);
  }
  HmcReferenceConfig hmc;
  hmc.prior_variance = prior_variance;
  hmc.hmc.seed = o.seed;
  hmc.hmc.chains = o.chains;
  hmc.hmc.warmup = o.warmup;
  hmc.hmc.draws = o.draws;
  hmc.hmc.thinning = o.thinning;
  hmc.hmc.trajectory_length =
      o.trajectory_length > 0 ? o.trajectory_length : kTrajectoryPriorStddevs * std::sqrt(prior_variance);
  hmc.hmc.trajectory_jitter = 0.2;  // Neal 2011 sec. 5.4.2: breaks periodic orbits
  std::vector<std::vector<double>> starts;
  for (int c = 0; c < o.chains; ++c) {
    const std::vector<float>& p = MemberPoint(bundle.members[static_cast<size_t>(c) % bundle.members.size()]);
    starts.emplace_back(p.begin(), p.end());
  }
  LogPrintf(stderr, LogLevel::kInfo,
            "chorus reference: %d chains x (%d warm-up + %d draws) of full-batch HMC on %lld rows, "
            "%lld parameters, prior variance %.4g, trajectory %.4g",
            o.chains, o.warmup, o.draws, static_cast<long long>(data.train.rows()),
            static_cast<long long>(net.ParameterCount()), prior_variance, hmc.hmc.trajectory_length);
  const int threads = o.threads > 0 ? o.threads : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  tbb::task_arena arena(threads);
  const TbbParallelFor parallel;
  const auto start = std::chrono::steady_clock::now();
  StatusOr<HmcReference> sampled = Status::Internal("not run");
  // A line per chain every tenth of its iterations, from whichever thread runs it.
  hmc.hmc.progress_every = std::max(1, (o.warmup + o.draws) / 10);
  std::mutex progress_mutex;
  const auto progress = [&](const HmcProgress& p) {
    std::lock_guard<std::mutex> lock(progress_mutex);
    LogPrintf(stderr, LogLevel::kInfo, "chain %d: iteration %lld/%lld (%s), step %.3g, %.0f s", p.chain,
              static_cast<long long>(p.iteration), static_cast<long long>(p.total_iterations),
              p.iteration <= o.warmup ? "warm-up" : "sampling", p.step_size,
              std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
    return true;
  };
  arena.execute([&] {
    sampled = RunHmcReference(net, Task::kClassification, data.train, data.test.x, starts, hmc, &parallel, progress);
  });
  CHORUS_RETURN_IF_ERROR(sampled.status());
  const HmcReference& ref = sampled.value();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();

  CHORUS_ASSIGN_OR_RETURN(const Predictor predictor, Predictor::Create(bundle));
  std::vector<Compared> compared;
  compared.push_back({"HMC reference", ref.predictive});
  compared.push_back({"ensemble (bundle: weights, samples, temperature)",
                      predictor.Predict(data.test.x).classification.probabilities});
  compared.push_back({"members' points, T = 1",
                      PosteriorPredictive(net, Task::kClassification, {MemberPoints(bundle, 0, bundle.members.size())}, data.test.x)});
  compared.push_back({"member 0's point alone, T = 1",
                      PosteriorPredictive(net, Task::kClassification, {MemberPoints(bundle, 0, 1)}, data.test.x)});
  json predictives = json::array();
  for (const Compared& c : compared) {
    CHORUS_ASSIGN_OR_RETURN(const PredictiveAgreement a, ComparePredictives(ref.predictive, c.probabilities));
    const ClassificationMetrics m = ScoreClassification(c.probabilities, data.test.labels, kEceBins);
    predictives.push_back({{"predictive", c.name}, {"top1_agreement", a.top1_agreement},
                           {"mean_total_variation", a.mean_total_variation},
                           {"test", {{"nll", m.nll}, {"accuracy", m.accuracy}, {"ece", m.ece}}}});
  }
  return json{{"run", report.value("name", "")},
              {"basin_method", BasinMethodName(config.ensemble.basin.method)},
              {"hmc",
               {{"chains", o.chains}, {"warmup", o.warmup}, {"draws", o.draws}, {"thinning", o.thinning},
                {"seed", std::to_string(o.seed)}, {"prior_variance", prior_variance},
                {"trajectory_length", hmc.hmc.trajectory_length}, {"kept_draws", ref.draws},
                {"max_r_hat", ref.max_r_hat}, {"min_ess", ref.min_ess},
                {"mean_accept_probability", ref.mean_accept_probability},
                {"divergences", ref.divergences}, {"converged", ref.max_r_hat < kRhatLimit},
                {"cpu_wall_seconds", seconds}, {"train_rows", data.train.rows()},
                {"parameters", net.ParameterCount()}}},
              {"test_rows", data.test.rows()},
              {"predictives", predictives}};
}

std::string Table(const json& r) {
  const json& h = r["hmc"];
  char line[256];
  std::snprintf(line, sizeof line,
                "HMC: %lld kept draws, max R-hat %.4f, min ESS %.0f, acceptance %.2f, %lld divergences, %.0f s\n",
                h["kept_draws"].get<long long>(), h["max_r_hat"].get<double>(), h["min_ess"].get<double>(),
                h["mean_accept_probability"].get<double>(), h["divergences"].get<long long>(),
                h["cpu_wall_seconds"].get<double>());
  std::string out = line;
  if (!h["converged"].get<bool>()) {
    out += "warning: R-hat above 1.01 (Vehtari et al. 2021): the chains disagree; run more draws or "
           "warm-up before trusting the comparison\n";
  }
  std::snprintf(line, sizeof line, "%-50s %9s %9s %9s %9s\n", "predictive", "agreement", "TV", "test NLL", "accuracy");
  out += line;
  for (const json& p : r["predictives"]) {
    std::snprintf(line, sizeof line, "%-50s %9.4f %9.4f %9.4f %9.4f\n", p["predictive"].get<std::string>().c_str(),
                  p["top1_agreement"].get<double>(), p["mean_total_variation"].get<double>(),
                  p["test"]["nll"].get<double>(), p["test"]["accuracy"].get<double>());
    out += line;
  }
  return out;
}

}  // namespace

int ReferenceCommand(const ReferenceOptions& options) {
  StatusOr<json> report = ReadRunReport(options.run_dir);
  StatusOr<json> result = report.ok() ? Reference(options, report.value()) : report.status();
  Status st = result.status();
  if (st.ok()) st = WriteFileAtomic(options.run_dir + "/hmc_reference.json", result.value().dump(2) + "\n");
  // The report shows the comparison from now on (report.json's "hmc_reference", an HTML section).
  if (st.ok()) st = WriteReportFiles(options.run_dir, std::move(report).value());
  if (!st.ok()) {
    LogPrintf(stderr, LogLevel::kError, "chorus reference: %s", st.ToString().c_str());
    return st.ExitCode();
  }
  std::fputs(Table(result.value()).c_str(), stdout);
  std::printf("written: %s/hmc_reference.json; report.json and report.html show it\n", options.run_dir.c_str());
  return 0;
}

}  // namespace chorus

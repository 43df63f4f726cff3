#include "common/hmc.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <utility>

#include "common/rng.h"

namespace chorus {
namespace {

Status CheckConfig(const HmcConfig& c) {
  if (c.chains < 1) return Status::InvalidInput("hmc.chains must be >= 1");
  if (c.warmup < 0) return Status::InvalidInput("hmc.warmup must be >= 0");
  if (c.draws < 1) return Status::InvalidInput("hmc.draws must be >= 1");
  if (c.thinning < 1 || c.thinning > c.draws)
    return Status::InvalidInput("hmc.thinning must be in [1, draws]");
  if (!(c.trajectory_length > 0) || !std::isfinite(c.trajectory_length))
    return Status::InvalidInput("hmc.trajectory_length must be a positive number");
  if (!(c.trajectory_jitter >= 0 && c.trajectory_jitter < 1))
    return Status::InvalidInput("hmc.trajectory_jitter must be in [0, 1)");
  if (!(c.target_acceptance > 0 && c.target_acceptance < 1))
    return Status::InvalidInput("hmc.target_acceptance must be in (0, 1)");
  if (!(c.initial_step > 0) || !std::isfinite(c.initial_step))
    return Status::InvalidInput("hmc.initial_step must be a positive number");
  if (c.max_leapfrog_steps < 1) return Status::InvalidInput("hmc.max_leapfrog_steps must be >= 1");
  if (c.progress_every < 0) return Status::InvalidInput("hmc.progress_every must be >= 0");
  return Status::Ok();
}

// Dual averaging of the log step size (Hoffman & Gelman 2014, sec. 3.2, eq. 6 and the iterate
// average below it), with their constants gamma = 0.05, t0 = 10, kappa = 0.75:
//   H_m = (1 - 1/(m + t0)) H_{m-1} + (delta - alpha_m) / (m + t0)
//   log eps_m = mu - sqrt(m) / gamma H_m,   mu = log(10 eps_0)
//   log epsbar_m = m^-kappa log eps_m + (1 - m^-kappa) log epsbar_{m-1}
class DualAveraging {
 public:
  DualAveraging(double initial_step, double target)
      : mu_(std::log(10.0 * initial_step)), target_(target) {}

  // Feeds the acceptance probability alpha_m of iteration m; returns eps_m for the next one.
  double Update(double accept_probability) {
    constexpr double kGamma = 0.05, kT0 = 10.0, kKappa = 0.75;
    ++m_;
    const double eta = 1.0 / (m_ + kT0);
    h_bar_ = (1.0 - eta) * h_bar_ + eta * (target_ - accept_probability);
    const double log_step = mu_ - std::sqrt(static_cast<double>(m_)) / kGamma * h_bar_;
    const double weight = std::pow(static_cast<double>(m_), -kKappa);
    log_step_bar_ = weight * log_step + (1.0 - weight) * log_step_bar_;
    return std::exp(log_step);
  }

  // eps-bar, the step for sampling.
  double FinalStep() const { return std::exp(log_step_bar_); }

 private:
  double mu_, target_;
  int64_t m_ = 0;
  double h_bar_ = 0.0, log_step_bar_ = 0.0;
};

int StepsFor(double length, double step, int max_steps) {
  const double steps = std::ceil(length / step);
  return steps >= max_steps ? max_steps : std::max(1, static_cast<int>(steps));
}

struct Transition {
  double accept_probability = 0;
  bool accepted = false;
  bool divergent = false;
};

// One chain's state and random stream; Step runs one HMC iteration.
class ChainSampler {
 public:
  ChainSampler(const LogDensityFunction& target, const HmcConfig& config, int chain,
               PhaseState start)
      : target_(target), config_(config), rng_(Derive(config.seed, static_cast<uint64_t>(chain))),
        current_(std::move(start)) {}

  // Draws a momentum p ~ N(0, I), integrates the trajectory and accepts with probability
  // min(1, exp(H_start - H_end)). Random draws per iteration, in order: the jitter uniform (when
  // jitter > 0), dim normals, the accept uniform.
  Transition Step(double step) {
    double length = config_.trajectory_length;
    if (config_.trajectory_jitter > 0)
      length *= 1.0 + config_.trajectory_jitter * (2.0 * rng_.NextUniform() - 1.0);
    for (double& p : current_.momentum) p = rng_.NextNormal();
    proposal_ = current_;
    const bool finite = Leapfrog(target_, step, StepsFor(length, step, config_.max_leapfrog_steps),
                                 proposal_);
    const double energy_error = finite ? Hamiltonian(proposal_) - Hamiltonian(current_) : HUGE_VAL;
    Transition t;
    t.divergent = !(energy_error <= kDivergentEnergyError);  // NaN counts as divergent
    t.accept_probability = t.divergent ? 0.0 : std::min(1.0, std::exp(-energy_error));
    t.accepted = rng_.NextUniform() < t.accept_probability;
    if (t.accepted) std::swap(current_, proposal_);
    return t;
  }

  const std::vector<double>& theta() const { return current_.theta; }

 private:
  const LogDensityFunction& target_;
  const HmcConfig& config_;
  Philox rng_;
  PhaseState current_, proposal_;
};

Status CheckStart(const LogDensityFunction& target, const std::vector<double>& initial,
                  PhaseState& start) {
  if (initial.empty()) return Status::InvalidInput("the initial position is empty");
  start.theta = initial;
  start.momentum.assign(initial.size(), 0.0);
  start.log_density = target(start.theta, start.grad);
  if (!std::isfinite(start.log_density))
    return Status::InvalidInput("the log density at the initial position is not finite");
  if (start.grad.size() != initial.size())
    return Status::InvalidInput("the target's gradient has " + std::to_string(start.grad.size()) +
                                " entries, the position " + std::to_string(initial.size()));
  return Status::Ok();
}

}  // namespace

double Hamiltonian(const PhaseState& s) {
  double kinetic = 0.0;
  for (double p : s.momentum) kinetic += p * p;
  return -s.log_density + 0.5 * kinetic;
}

bool Leapfrog(const LogDensityFunction& target, double step, int steps, PhaseState& s) {
  const double half = 0.5 * step;
  for (int i = 0; i < steps; ++i) {
    for (size_t j = 0; j < s.theta.size(); ++j) s.momentum[j] += half * s.grad[j];
    for (size_t j = 0; j < s.theta.size(); ++j) s.theta[j] += step * s.momentum[j];
    s.log_density = target(s.theta, s.grad);
    if (!std::isfinite(s.log_density)) return false;
    for (size_t j = 0; j < s.theta.size(); ++j) s.momentum[j] += half * s.grad[j];
  }
  return true;
}

StatusOr<HmcChain> RunHmcChain(const LogDensityFunction& target, const std::vector<double>& initial,
                               const HmcConfig& config, int chain,
                               const HmcProgressFunction& progress) {
  CHORUS_RETURN_IF_ERROR(CheckConfig(config));
  const std::string where = "hmc chain " + std::to_string(chain);
  if (chain < 0 || chain >= config.chains) return Status::InvalidInput(where + ": no such chain");
  PhaseState start;
  CHORUS_RETURN_IF_ERROR(CheckStart(target, initial, start).WithContext(where));
  ChainSampler sampler(target, config, chain, std::move(start));
  DualAveraging adaptation(config.initial_step, config.target_acceptance);
  HmcChain out;
  out.draws.resize(config.draws / config.thinning, static_cast<Eigen::Index>(initial.size()));
  double step = config.initial_step, accept_sum = 0.0;
  int64_t accepted = 0;
  const int64_t total = int64_t{config.warmup} + config.draws;
  for (int64_t it = 0; it < total; ++it) {
    const bool warming = it < config.warmup;
    if (it == config.warmup && config.warmup > 0) step = adaptation.FinalStep();
    const Transition t = sampler.Step(step);
    if (warming) {
      out.warmup_divergences += t.divergent;
      step = adaptation.Update(t.accept_probability);
    } else {
      const int64_t i = it - config.warmup;
      accept_sum += t.accept_probability;
      accepted += t.accepted;
      out.divergences += t.divergent;
      if ((i + 1) % config.thinning == 0) {
        out.draws.row(i / config.thinning) =
            Eigen::Map<const Eigen::RowVectorXd>(sampler.theta().data(), out.draws.cols());
      }
    }
    if (progress && config.progress_every > 0 && (it + 1) % config.progress_every == 0 &&
        !progress(HmcProgress{chain, it + 1, total, step})) {
      return Status::Cancelled(where + ": stopped by the progress callback");
    }
  }
  out.mean_accept_probability = accept_sum / config.draws;
  out.accepted_fraction = static_cast<double>(accepted) / config.draws;
  out.step_size = step;
  out.leapfrog_steps = StepsFor(config.trajectory_length, step, config.max_leapfrog_steps);
  return out;
}

StatusOr<HmcResult> RunHmc(const LogDensityFunction& target,
                           const std::vector<std::vector<double>>& initial, const HmcConfig& config,
                           const HmcProgressFunction& progress) {
  CHORUS_RETURN_IF_ERROR(CheckConfig(config));
  if (initial.size() != 1 && initial.size() != static_cast<size_t>(config.chains)) {
    return Status::InvalidInput("hmc: " + std::to_string(initial.size()) +
                                " initial positions for " + std::to_string(config.chains) +
                                " chains (give one, or one per chain)");
  }
  for (const auto& position : initial) {
    if (position.size() != initial.front().size())
      return Status::InvalidInput("hmc: initial positions differ in size");
  }
  HmcResult result;
  for (int c = 0; c < config.chains; ++c) {
    CHORUS_ASSIGN_OR_RETURN(HmcChain chain,
                            RunHmcChain(target, initial[initial.size() == 1 ? 0 : c], config, c,
                                        progress));
    result.chains.push_back(std::move(chain));
  }
  return result;
}

}  // namespace chorus

#include "common/sgmcmc_step.h"

#include <array>
#include <cmath>

#include "common/rng.h"

namespace chorus {
namespace {

// The four standard normals of Philox block `block`: Box-Muller on words (0, 1) and (2, 3).
std::array<float, 4> NormalsOfBlock(const Philox& stream, int64_t block) {
  const std::array<uint32_t, 4> words = stream.Block(static_cast<uint64_t>(block));
  std::array<float, 4> z;
  for (int pair = 0; pair < 2; ++pair) {
    const double u1 = (static_cast<double>(words[2 * pair]) + 1.0) * 0x1.0p-32;  // (0, 1]
    const double angle = 2.0 * M_PI * static_cast<double>(words[2 * pair + 1]) * 0x1.0p-32;
    const double r = std::sqrt(-2.0 * std::log(u1));
    z[2 * pair] = static_cast<float>(r * std::cos(angle));
    z[2 * pair + 1] = static_cast<float>(r * std::sin(angle));
  }
  return z;
}

}  // namespace

const char* SgmcmcSamplerName(SgmcmcSampler sampler) {
  return sampler == SgmcmcSampler::kSgld ? "sgld" : "sghmc";
}

std::optional<SgmcmcSampler> ParseSgmcmcSampler(const std::string& name) {
  for (SgmcmcSampler s : {SgmcmcSampler::kSgld, SgmcmcSampler::kSghmc}) {
    if (name == SgmcmcSamplerName(s)) return s;
  }
  return std::nullopt;
}

Status ValidateSgmcmcConfig(const SgmcmcConfig& c) {
  if (c.cycles < 1) {
    return Status::InvalidInput("cycles: expected a cycle count >= 1, found " +
                                std::to_string(c.cycles));
  }
  if (!(c.exploration_fraction >= 0.0 && c.exploration_fraction < 1.0)) {
    return Status::InvalidInput("exploration_fraction: expected a fraction in [0, 1), found " +
                                std::to_string(c.exploration_fraction));
  }
  if (c.samples_per_cycle < 1) {
    return Status::InvalidInput("samples_per_cycle: expected a sample count >= 1, found " +
                                std::to_string(c.samples_per_cycle));
  }
  if (!(c.temperature >= 0.0 && std::isfinite(c.temperature))) {
    return Status::InvalidInput("temperature: expected a finite temperature >= 0, found " +
                                std::to_string(c.temperature));
  }
  if (!(c.friction > 0.0 && c.friction <= 1.0)) {
    return Status::InvalidInput("friction: expected a friction in (0, 1], found " +
                                std::to_string(c.friction));
  }
  return Status::Ok();
}

CyclicalSchedule CyclicalScheduleFor(const SgmcmcConfig& config, int64_t total_steps) {
  return {total_steps, config.cycles, config.exploration_fraction, config.samples_per_cycle};
}

SgmcmcStep PlanSgmcmcStep(const SgmcmcConfig& config, const CyclicalSchedule& schedule,
                          double base_lr, double weight_decay, int64_t train_rows,
                          uint64_t noise_seed, int64_t step) {
  const double lr = CyclicalStepSize(schedule, base_lr, step);
  const bool sghmc = config.sampler == SgmcmcSampler::kSghmc;
  const bool sampling = PhaseOf(schedule, step) == CyclePhase::kSampling;
  const double variance = 2.0 * (sghmc ? config.friction : 1.0) * lr * config.temperature /
                          static_cast<double>(train_rows);
  SgmcmcStep s;
  s.sampler = config.sampler;
  s.lr = static_cast<float>(lr);
  s.weight_decay = static_cast<float>(weight_decay);
  s.friction = static_cast<float>(config.friction);
  s.noise_std = sampling ? static_cast<float>(std::sqrt(variance)) : 0.0f;
  s.noise_key = Derive(noise_seed, static_cast<uint64_t>(step));
  return s;
}

void SgmcmcEntries(const SgmcmcStep& s, int64_t first, const float* g, float* w, float* v,
                   int64_t count) {
  const Philox stream(s.noise_key);
  const bool noisy = s.noise_std > 0.0f;
  const float keep = 1.0f - s.friction;
  std::array<float, 4> z{};
  for (int64_t i = 0; i < count; ++i) {
    const int64_t j = first + i;
    if (noisy && (i == 0 || j % 4 == 0)) z = NormalsOfBlock(stream, j / 4);
    const float noise = noisy ? s.noise_std * z[j % 4] : 0.0f;
    const float d = g[i] + s.weight_decay * w[i];
    if (s.sampler == SgmcmcSampler::kSgld) {
      w[i] = w[i] - s.lr * d + noise;
    } else {
      v[i] = keep * v[i] - s.lr * d + noise;
      w[i] += v[i];
    }
  }
}

}  // namespace chorus

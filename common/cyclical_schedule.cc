#include "common/cyclical_schedule.h"

#include <cmath>
#include <string>

namespace chorus {
namespace {

// r = (position / L) as the paper writes it, in double, so every caller draws the phase boundary
// at the same place.
bool InExploration(int64_t position, int64_t length, double beta) {
  return static_cast<double>(position) / static_cast<double>(length) < beta;
}

// P0: the first position of a cycle with r >= beta (length when there is none).
int64_t SamplingStart(int64_t length, double beta) {
  int64_t p = static_cast<int64_t>(std::ceil(beta * static_cast<double>(length)));
  if (p > length) p = length;
  while (p > 0 && !InExploration(p - 1, length, beta)) --p;
  while (p < length && InExploration(p, length, beta)) ++p;
  return p;
}

// Position of sample j within a cycle: P0 + floor((j + 1) S / n) - 1.
int64_t SamplePosition(int64_t start, int64_t sampling, int per_cycle, int64_t j) {
  return start + (j + 1) * sampling / per_cycle - 1;
}

}  // namespace

Status ValidateCyclicalSchedule(const CyclicalSchedule& s) {
  if (s.total_steps < 1) {
    return Status::InvalidInput("total_steps: expected a step count >= 1, found " +
                                std::to_string(s.total_steps));
  }
  if (s.cycles < 1 || s.cycles > s.total_steps) {
    return Status::InvalidInput("cycles: expected a cycle count in [1, " +
                                std::to_string(s.total_steps) + "] (the total steps), found " +
                                std::to_string(s.cycles));
  }
  if (!(s.exploration_fraction >= 0.0 && s.exploration_fraction < 1.0)) {
    return Status::InvalidInput("exploration_fraction: expected a fraction in [0, 1), found " +
                                std::to_string(s.exploration_fraction));
  }
  const int64_t length = CycleLength(s);
  const int64_t sampling = length - SamplingStart(length, s.exploration_fraction);
  if (sampling == 0) {
    return Status::InvalidInput("exploration_fraction: " + std::to_string(s.exploration_fraction) +
                                " leaves no sampling step in a cycle of " + std::to_string(length) +
                                " steps");
  }
  if (s.samples_per_cycle < 1 || s.samples_per_cycle > sampling) {
    return Status::InvalidInput("samples_per_cycle: expected a sample count in [1, " +
                                std::to_string(sampling) + "] (the sampling steps of a cycle of " +
                                std::to_string(length) + " steps), found " +
                                std::to_string(s.samples_per_cycle));
  }
  return Status::Ok();
}

int64_t CycleLength(const CyclicalSchedule& s) { return (s.total_steps + s.cycles - 1) / s.cycles; }

double CyclicalStepSize(const CyclicalSchedule& s, double base, int64_t step) {
  const int64_t length = CycleLength(s);
  const double r = static_cast<double>(step % length) / static_cast<double>(length);
  return base / 2.0 * (std::cos(M_PI * r) + 1.0);
}

CyclePhase PhaseOf(const CyclicalSchedule& s, int64_t step) {
  const int64_t length = CycleLength(s);
  return InExploration(step % length, length, s.exploration_fraction) ? CyclePhase::kExploration
                                                                      : CyclePhase::kSampling;
}

bool IsSampleStep(const CyclicalSchedule& s, int64_t step) {
  const int64_t length = CycleLength(s);
  const int64_t start = SamplingStart(length, s.exploration_fraction);
  const int64_t q = step % length - start;  // place in the sampling phase
  if (q < 0) return false;
  // The one j that could land on q is the smallest with floor((j + 1) S / n) >= q + 1.
  const int64_t sampling = length - start, n = s.samples_per_cycle;
  const int64_t j = ((q + 1) * n + sampling - 1) / sampling - 1;
  return SamplePosition(start, sampling, s.samples_per_cycle, j) == step % length;
}

int64_t SampleCount(const CyclicalSchedule& s) {
  const int64_t length = CycleLength(s);
  const int64_t start = SamplingStart(length, s.exploration_fraction);
  const int64_t tail = s.total_steps % length;  // steps of a cut-short last cycle (0: none)
  int64_t count = s.total_steps / length * s.samples_per_cycle;
  for (int64_t j = 0; j < s.samples_per_cycle; ++j) {
    if (SamplePosition(start, length - start, s.samples_per_cycle, j) < tail) ++count;
  }
  return count;
}

}  // namespace chorus

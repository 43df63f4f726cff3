// How a stage's jobs fill this machine's job slots. Jobs run in rounds of one job per slot, so
// J jobs on S slots take ceil(J / S) rounds, and when S does not divide J the last round leaves
// slots idle for about a job's time: with five members on two slots the fifth trains alone while
// a core waits, 1.2x the time the work needs (README, "Where a run's wall time goes").
// Thread safety: a pure function.
#pragma once

#include <cstdint>
#include <string>

namespace chorus {

// The line to print when `jobs` on `slots` (>= 1) leave at least a tenth of the rounds' slot time
// idle, naming the job counts on either side that would fill every round; else "".
std::string IdleSlotAdvice(int64_t jobs, int slots);

}  // namespace chorus

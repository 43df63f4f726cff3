#include "coordinator/slot_rounds.h"

namespace chorus {

std::string IdleSlotAdvice(int64_t jobs, int slots) {
  if (jobs <= 0 || slots <= 1 || jobs % slots == 0) return "";
  const int64_t rounds = (jobs + slots - 1) / slots;
  const int64_t idle = rounds * slots - jobs;
  if (idle * 10 < rounds * slots) return "";  // under a tenth of the slot time: not worth a line
  const std::string s = std::to_string(slots);
  if (rounds == 1) {
    return std::to_string(jobs) + " job(s) on " + s + " slots: " + std::to_string(idle) +
           " slot(s) idle throughout; " + s + " jobs would take about the same wall time";
  }
  return std::to_string(jobs) + " jobs on " + s + " slots: the last of " + std::to_string(rounds) +
         " rounds leaves " + std::to_string(idle) + " slot(s) idle; " +
         std::to_string((rounds - 1) * slots) + " or " + std::to_string(rounds * slots) +
         " jobs would fill every round";
}

}  // namespace chorus

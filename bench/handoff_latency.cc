// chorus-bench-handoff: what it costs a training step to hand a block of work to another thread.
// A step cuts a dozen products and passes into blocks (common/mlp.h), with short serial gaps
// between them; what matters is how long a call takes when the other thread has been idle for a
// gap. For each gap G (microseconds of serial work on the calling thread) and each ParallelFor,
// 2,000 calls of two items of 20 microseconds of spinning each; the mean call time is reported
// (ideal: 20).
//   tbb:  execution/tbb_parallel_for.h on a tbb::task_arena of 2 (its workers sleep when idle)
//   team: execution/helper_team.h's TeamParallelFor(2) (its helper spins for 2 ms, then sleeps)
// Usage: chorus-bench-handoff
// Output: one line per (kind, gap): handoff kind=K gap_us=G call_us=C
#include <tbb/task_arena.h>

#include <chrono>
#include <cstdio>

#include "execution/helper_team.h"
#include "execution/tbb_parallel_for.h"

namespace {

using Clock = std::chrono::steady_clock;

void SpinFor(double microseconds) {
  const Clock::time_point start = Clock::now();
  while (std::chrono::duration<double, std::micro>(Clock::now() - start).count() < microseconds) {
  }
}

double MeanCallMicroseconds(const chorus::ParallelFor& parallel, double gap_us) {
  constexpr int kCalls = 2000;
  double total = 0;
  for (int i = 0; i < kCalls; ++i) {
    SpinFor(gap_us);
    const Clock::time_point start = Clock::now();
    parallel.Run(2, [](void*, int64_t) { SpinFor(20); }, nullptr);
    total += std::chrono::duration<double, std::micro>(Clock::now() - start).count();
  }
  return total / kCalls;
}

}  // namespace

int main(int argc, char**) {
  if (argc > 1) {
    std::fprintf(stderr, "usage: chorus-bench-handoff   (no arguments)\n");
    return 2;
  }
  const double gaps[] = {0, 50, 200, 1000, 5000};
  tbb::task_arena arena(2);
  const chorus::TbbParallelFor tbb;
  arena.execute([&] {
    for (double gap : gaps) {
      std::printf("handoff kind=tbb gap_us=%.0f call_us=%.1f\n", gap, MeanCallMicroseconds(tbb, gap));
    }
  });
  const chorus::TeamParallelFor team(2);
  for (double gap : gaps) {
    std::printf("handoff kind=team gap_us=%.0f call_us=%.1f\n", gap, MeanCallMicroseconds(team, gap));
  }
  return 0;
}

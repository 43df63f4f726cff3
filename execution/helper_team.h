// Threads that help one job with its ParallelFor items (execution/job_slots.h: the threads a job
// is granted). The calling thread runs items 0, h + 1, 2 (h + 1), ... and helper i the items
// i + 1, i + 1 + (h + 1), ...: a block of rows goes to the same thread on every call, so it stays
// in that core's cache from one product to the next. Between calls a helper spins for up to
// kSpinSeconds (pausing, and yielding its core every thousand pauses, as the caller does while it
// waits for the helpers), then sleeps until the next call. Measured by chorus-bench-handoff
// (BENCHMARKS.md): a call after a gap under 1 ms costs about what a call without one does, where
// oneTBB's workers, asleep after about 200 us, cost 8-40 us more.
// Thread safety: Run is called from one thread at a time (the job's); helpers start on the first
// Run that uses them (their only allocations) and stop in the destructor.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <mutex>
#include <thread>
#include <vector>

#include "common/parallel_for.h"

namespace chorus {

class HelperTeam {
 public:
  // How long a helper spins waiting for the next call before it sleeps: longer than the gaps
  // between a training step's products and passes, shorter than an epoch's validation pass.
  static constexpr double kSpinSeconds = 0.002;

  explicit HelperTeam(int max_helpers);
  ~HelperTeam();
  HelperTeam(const HelperTeam&) = delete;
  HelperTeam& operator=(const HelperTeam&) = delete;

  int max_helpers() const { return max_helpers_; }

  // Runs body(context, i) for every i in [0, count) on the calling thread and `helpers` helpers
  // (1 <= helpers <= max_helpers()); returns when all have returned.
  void Run(int helpers, int64_t count, void (*body)(void* context, int64_t i), void* context);

 private:
  // Waits until the call after `seen` is published or the team stops; returns the new
  // generation, or 0 to stop.
  uint64_t AwaitCall(uint64_t seen);

  const int max_helpers_;
  std::vector<std::thread> threads_;
  // The current call, written by Run before it publishes `generation_`.
  void (*body_)(void*, int64_t) = nullptr;
  void* context_ = nullptr;
  int64_t count_ = 0;
  int participants_ = 1;  // the caller and the helpers this call uses
  std::atomic<uint64_t> generation_{0};
  std::atomic<int> remaining_{0};  // helpers of the current call still running items
  std::atomic<int> sleeping_{0};
  std::atomic<bool> stop_{false};
  std::mutex mu_;
  std::condition_variable wake_;
};

// A ParallelFor over the calling thread and a team of threads - 1 helpers, all used on every
// call: for benchmarks and tests of a job that has a fixed grant. Calls from one thread at a time.
class TeamParallelFor final : public ParallelFor {
 public:
  explicit TeamParallelFor(int threads) : helpers_(threads - 1) {}
  void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const override {
    helpers_.Run(helpers_.max_helpers(), count, body, context);
  }
  int Threads() const override { return 1 + helpers_.max_helpers(); }

 private:
  mutable HelperTeam helpers_;
};

}  // namespace chorus

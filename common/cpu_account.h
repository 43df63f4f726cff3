// CPU-seconds of one piece of work (a member's training, its basin fit, its samples), counted on
// the thread that runs it and on every thread that runs one of its ParallelFor items, even while
// other work shares those threads: a thread that runs another job's items while it waits (oneTBB
// work stealing) does not charge them to this account, because every item run through an
// account's parallel() is charged to that account alone.
// Clock: CLOCK_THREAD_CPUTIME_ID (user + system time of the thread). Cost: two clock reads per
// ParallelFor item, well under a microsecond.
// Thread safety: construct, read and destroy an account on one thread, in nested (stack) order
// with any other account on that thread; parallel() may be used from that thread only, and its
// items may run on any thread.
#pragma once

#include <atomic>
#include <cstdint>

#include "common/parallel_for.h"

namespace chorus {

// The calling thread's CPU time so far, in seconds.
double ThreadCpuSeconds();

class CpuAccount {
 public:
  // Starts counting on the calling thread. `inner` (may be null: items run in order on this
  // thread) is where parallel() sends items.
  explicit CpuAccount(const ParallelFor* inner);
  ~CpuAccount();
  CpuAccount(const CpuAccount&) = delete;
  CpuAccount& operator=(const CpuAccount&) = delete;

  // Runs items through `inner`, charging each item's CPU time to this account. Null when inner is.
  const ParallelFor* parallel() const { return inner_ == nullptr ? nullptr : &charging_; }

  // CPU-seconds charged so far: this thread's since construction, less what it spent on other
  // accounts' items, plus this account's items on every thread.
  double Seconds() const;

 private:
  class ChargingParallelFor final : public ParallelFor {
   public:
    explicit ChargingParallelFor(CpuAccount& account) : account_(account) {}
    void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const override;
    int Threads() const override { return account_.inner_->Threads(); }

   private:
    CpuAccount& account_;
  };

  const ParallelFor* inner_;
  ChargingParallelFor charging_{*this};
  double start_ = 0;                   // this thread's CPU time at construction
  double outer_nested_ = 0;            // the enclosing region's nested time, restored at the end
  std::atomic<int64_t> item_nanoseconds_{0};
};

}  // namespace chorus

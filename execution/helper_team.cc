#include "execution/helper_team.h"

#include <algorithm>
#include <chrono>

namespace chorus {
namespace {

inline void CpuRelax() {
#if defined(__x86_64__) || defined(__i386__)
  __builtin_ia32_pause();
#endif
}

// One step of a spin-wait: a pause, and every kPausesPerYield pauses a yield, so that a thread
// waiting for another that the OS has preempted (more threads than cores, until a grant that no
// longer holds is withdrawn) gives its core up instead of spinning out its time slice.
constexpr int kPausesPerYield = 1024;
inline void SpinStep(int& spins) {
  CpuRelax();
  if (++spins % kPausesPerYield == 0) std::this_thread::yield();
}

}  // namespace

HelperTeam::HelperTeam(int max_helpers) : max_helpers_(std::max(0, max_helpers)) {}

HelperTeam::~HelperTeam() {
  stop_.store(true);
  {
    std::lock_guard<std::mutex> lock(mu_);  // a helper between its check and its wait sees stop_
  }
  wake_.notify_all();
  for (std::thread& t : threads_) t.join();
}

void HelperTeam::Run(int helpers, int64_t count, void (*body)(void* context, int64_t i), void* context) {
  helpers = static_cast<int>(std::min<int64_t>({helpers, max_helpers_, count - 1}));
  if (helpers <= 0) {
    for (int64_t i = 0; i < count; ++i) body(context, i);
    return;
  }
  while (static_cast<int>(threads_.size()) < helpers) {
    const int index = static_cast<int>(threads_.size());
    const uint64_t now = generation_.load();
    threads_.emplace_back([this, index, now] {
      uint64_t seen = now;
      while ((seen = AwaitCall(seen)) != 0) {
        if (index + 1 < participants_) {
          for (int64_t i = index + 1; i < count_; i += participants_) body_(context_, i);
        }
        remaining_.fetch_sub(1, std::memory_order_release);
      }
    });
  }
  body_ = body;
  context_ = context;
  count_ = count;
  participants_ = helpers + 1;
  // Every started helper acknowledges every call, used or not, so that none still reads this
  // call's fields when the next call writes them.
  remaining_.store(static_cast<int>(threads_.size()), std::memory_order_relaxed);
  generation_.fetch_add(1);  // publishes the fields above (sequentially consistent: see AwaitCall)
  if (sleeping_.load() > 0) {
    std::lock_guard<std::mutex> lock(mu_);
    wake_.notify_all();
  }
  for (int64_t i = 0; i < count; i += participants_) body(context, i);
  for (int spins = 0; remaining_.load(std::memory_order_acquire) > 0;) SpinStep(spins);
}

uint64_t HelperTeam::AwaitCall(uint64_t seen) {
  using Clock = std::chrono::steady_clock;
  const Clock::time_point spin_until =
      Clock::now() + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(kSpinSeconds));
  for (int spins = 0;;) {
    const uint64_t generation = generation_.load(std::memory_order_acquire);
    if (generation != seen) return generation;
    if (stop_.load(std::memory_order_relaxed)) return 0;
    SpinStep(spins);
    if (spins % 256 == 0 && Clock::now() > spin_until) break;
  }
  // Sleep. Run bumps the generation, then reads sleeping_; this thread counts itself in
  // sleeping_, then reads the generation (both sequentially consistent), so either Run sees the
  // sleeper and notifies under the mutex, or the predicate sees the new call.
  std::unique_lock<std::mutex> lock(mu_);
  sleeping_.fetch_add(1);
  wake_.wait(lock, [&] { return generation_.load() != seen || stop_.load(); });
  sleeping_.fetch_sub(1);
  const uint64_t generation = generation_.load();
  return generation != seen ? generation : 0;
}

}  // namespace chorus

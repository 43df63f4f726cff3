// Tells ThreadSanitizer about the happens-before edges oneTBB guarantees but TSan cannot see
// (Debian's libtbb is not instrumented): what a thread did before handing work to TBB happens
// before the work runs, and the work happens before the hand-back returns. No-ops in builds
// without TSan. Thread safety: any thread; `token` only names the edge (its address is used).
// Tokens live at fixed addresses (a task cannot read one from its functor before the hand-off
// is known), so hand-offs through one token also order unrelated tasks for TSan: a race between
// two tasks that TBB happens to sequence may go unseen, never the other way round.
#pragma once

#if defined(__has_feature)
#if __has_feature(thread_sanitizer)
#define CHORUS_TSAN 1
#endif
#endif
#if defined(__SANITIZE_THREAD__)
#define CHORUS_TSAN 1
#endif

#if defined(CHORUS_TSAN)
extern "C" void __tsan_acquire(void* addr);
extern "C" void __tsan_release(void* addr);
#endif

namespace chorus {

// Called by the thread handing off, before the hand-off.
inline void TsanHandOff(const void* token) {
#if defined(CHORUS_TSAN)
  __tsan_release(const_cast<void*>(token));
#else
  (void)token;
#endif
}

// Called by the thread taking over, before it touches what was handed off.
inline void TsanTakeOver(const void* token) {
#if defined(CHORUS_TSAN)
  __tsan_acquire(const_cast<void*>(token));
#else
  (void)token;
#endif
}

}  // namespace chorus

// How much slower this build runs the code under test than a plain Release build: 1 plain, 12
// under AddressSanitizer + UndefinedBehaviorSanitizer, 10 under ThreadSanitizer (round figures
// from this suite's own timings: the killed-worker test's 750-epoch jobs took 76 s under ASan +
// UBSan, its 300-epoch jobs 23 s under TSan). Tests whose jobs must last long enough to be interrupted
// divide their epochs by it, so that a job takes about the same wall time in every build.
#pragma once

#if defined(__SANITIZE_THREAD__)
#define CHORUS_TESTING_SLOWDOWN 10
#elif defined(__SANITIZE_ADDRESS__)
#define CHORUS_TESTING_SLOWDOWN 12
#elif defined(__has_feature)
#if __has_feature(thread_sanitizer)
#define CHORUS_TESTING_SLOWDOWN 10
#elif __has_feature(address_sanitizer)
#define CHORUS_TESTING_SLOWDOWN 12
#endif
#endif
#ifndef CHORUS_TESTING_SLOWDOWN
#define CHORUS_TESTING_SLOWDOWN 1
#endif

namespace chorus::testing {

inline constexpr int kSanitizerSlowdown = CHORUS_TESTING_SLOWDOWN;

}  // namespace chorus::testing

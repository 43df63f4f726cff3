#include "common/cpu_account.h"

#include <gtest/gtest.h>
#include <sys/resource.h>

#include <thread>
#include <vector>

namespace chorus {
namespace cpu_account_test {

// The thread's CPU time by another interface, getrusage(RUSAGE_THREAD) (Linux, getrusage(2)):
// user + system, microsecond resolution.
double RusageThreadSeconds() {
  rusage usage{};
  getrusage(RUSAGE_THREAD, &usage);
  const auto seconds = [](const timeval& t) { return static_cast<double>(t.tv_sec) + 1e-6 * static_cast<double>(t.tv_usec); };
  return seconds(usage.ru_utime) + seconds(usage.ru_stime);
}

// Burns `seconds` of this thread's CPU time (measured by getrusage, not by the code under test).
void Spin(double seconds) {
  const double end = RusageThreadSeconds() + seconds;
  volatile double sink = 0;
  while (RusageThreadSeconds() < end) sink = sink + 1;
}

// Runs each item on a thread of its own and joins them: the caller's thread sleeps meanwhile.
class ThreadPerItem final : public ParallelFor {
 public:
  void Run(int64_t count, void (*body)(void*, int64_t), void* context) const override {
    std::vector<std::thread> threads;
    for (int64_t i = 0; i < count; ++i) threads.emplace_back([=] { body(context, i); });
    for (std::thread& t : threads) t.join();
  }
  int Threads() const override { return 2; }
};

// Runs every item on the calling thread, as a oneTBB thread does when it takes other work's
// tasks while it waits.
class OnCallingThread final : public ParallelFor {
 public:
  void Run(int64_t count, void (*body)(void*, int64_t), void* context) const override {
    for (int64_t i = 0; i < count; ++i) body(context, i);
  }
  int Threads() const override { return 1; }
};

// Clock reads and the rusage interface's tick (Linux accounts thread time in scheduler ticks for
// getrusage's microseconds, finer for clock_gettime): a few milliseconds either way.
constexpr double kSlack = 0.005;

TEST(CpuAccountTest, ChargesTheCallingThreadsWork) {
  const double before = RusageThreadSeconds();
  CpuAccount account(nullptr);
  EXPECT_EQ(account.parallel(), nullptr);
  Spin(0.05);
  const double charged = account.Seconds();
  const double spent = RusageThreadSeconds() - before;
  EXPECT_NEAR(charged, spent, kSlack);
  EXPECT_GE(charged, 0.05 - kSlack);
}

TEST(CpuAccountTest, ChargesItemsOnOtherThreadsButNotTheWaitingThread) {
  const ThreadPerItem threads;
  CpuAccount account(&threads);
  ASSERT_NE(account.parallel(), nullptr);
  ParallelForEach(account.parallel(), 3, [](int64_t) { Spin(0.03); });
  // Three items of 30 ms each on three threads; this thread only waited in join.
  EXPECT_NEAR(account.Seconds(), 0.09, 3 * kSlack);
}

TEST(CpuAccountTest, WorkOfAnotherAccountRunOnThisThreadIsNotCharged) {
  const OnCallingThread inline_items;
  CpuAccount outer(&inline_items);
  Spin(0.02);
  double inner_seconds = 0;
  {
    // Another job's account, opened while `outer` is open on this thread (a slot thread that
    // runs another job's work while it waits), with items run here too.
    CpuAccount inner(&inline_items);
    ParallelForEach(inner.parallel(), 2, [](int64_t) { Spin(0.03); });
    Spin(0.01);
    inner_seconds = inner.Seconds();
  }
  ParallelForEach(outer.parallel(), 1, [](int64_t) { Spin(0.02); });
  EXPECT_NEAR(inner_seconds, 0.07, 3 * kSlack);
  EXPECT_NEAR(outer.Seconds(), 0.04, 3 * kSlack);
}

}  // namespace cpu_account_test
}  // namespace chorus

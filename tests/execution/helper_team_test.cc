// execution/helper_team.h: every item runs exactly once per call, item i on the same thread on
// every call (the caller takes items 0, h + 1, ...), through calls with fewer helpers, after the
// helpers have gone to sleep, and a team destroyed while they sleep stops them.
#include "execution/helper_team.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <thread>
#include <vector>

namespace chorus {
namespace helper_team_test {

// What each item of a call saw: how often it ran and on which thread.
struct Record {
  explicit Record(int64_t count) : runs(static_cast<size_t>(count)), thread(static_cast<size_t>(count)) {}
  std::vector<std::atomic<int>> runs;
  std::vector<std::thread::id> thread;

  static void Item(void* context, int64_t i) {
    Record& r = *static_cast<Record*>(context);
    r.runs[static_cast<size_t>(i)].fetch_add(1);
    r.thread[static_cast<size_t>(i)] = std::this_thread::get_id();
  }
};

TEST(HelperTeamTest, EachItemRunsOnceAndOnTheSameThreadEveryCall) {
  HelperTeam team(2);
  constexpr int64_t kCount = 10;
  std::vector<std::thread::id> first_threads;
  for (int call = 0; call < 100; ++call) {
    Record r(kCount);
    team.Run(2, kCount, &Record::Item, &r);
    for (int64_t i = 0; i < kCount; ++i) ASSERT_EQ(r.runs[static_cast<size_t>(i)].load(), 1) << "item " << i;
    // The caller takes items 0, 3, 6 and 9; helper h the items h + 1, h + 4, ...
    for (int64_t i = 0; i < kCount; ++i) {
      EXPECT_EQ(r.thread[static_cast<size_t>(i)] == std::this_thread::get_id(), i % 3 == 0) << "item " << i;
      EXPECT_EQ(r.thread[static_cast<size_t>(i)], r.thread[static_cast<size_t>(i % 3)]) << "item " << i;
    }
    if (call == 0) first_threads = r.thread;
    EXPECT_EQ(r.thread, first_threads) << "call " << call << " moved an item to another thread";
  }
}

TEST(HelperTeamTest, FewerHelpersFewerItemsAndSleepingHelpersStillRunEverything) {
  HelperTeam team(2);
  for (int helpers : {2, 1, 0, 2}) {
    for (int64_t count : {int64_t{1}, int64_t{2}, int64_t{7}}) {
      Record r(count);
      team.Run(helpers, count, &Record::Item, &r);
      for (int64_t i = 0; i < count; ++i) {
        EXPECT_EQ(r.runs[static_cast<size_t>(i)].load(), 1) << helpers << " helpers, item " << i << " of " << count;
      }
      const int64_t participants = 1 + std::min<int64_t>(helpers, count - 1);
      for (int64_t i = 0; i < count; ++i) {
        EXPECT_EQ(r.thread[static_cast<size_t>(i)] == std::this_thread::get_id(), i % participants == 0)
            << helpers << " helpers, item " << i << " of " << count;
      }
    }
    // Past the spin time the helpers sleep; the next call must wake them.
    std::this_thread::sleep_for(std::chrono::duration<double>(3 * HelperTeam::kSpinSeconds));
  }
}

TEST(HelperTeamTest, ATeamWhoseHelpersSleepStopsWhenDestroyed) {
  {
    HelperTeam team(2);
    Record r(3);
    team.Run(2, 3, &Record::Item, &r);
    std::this_thread::sleep_for(std::chrono::duration<double>(5 * HelperTeam::kSpinSeconds));
  }  // joins the sleeping helpers: a hang here fails the test by its time limit
  SUCCEED();
}

TEST(HelperTeamTest, TeamParallelForReportsItsThreadsAndRunsEveryItem) {
  const TeamParallelFor parallel(3);
  EXPECT_EQ(parallel.Threads(), 3);
  std::vector<std::atomic<int>> runs(50);
  ParallelForEach(&parallel, 50, [&](int64_t i) { runs[static_cast<size_t>(i)].fetch_add(1); });
  for (const auto& n : runs) EXPECT_EQ(n.load(), 1);
}

}  // namespace helper_team_test
}  // namespace chorus

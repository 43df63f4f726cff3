#include "coordinator/job_table.h"

#include <gtest/gtest.h>

namespace chorus {
namespace job_table_test {

const Clock::time_point kT0{};

TEST(JobTableTest, LeasesLowestQueuedJobAndSettlesWhenAllFinish) {
  JobTable t(2, 3, 10);
  auto a = t.Lease("w1", kT0);
  auto b = t.Lease("w2", kT0);
  ASSERT_TRUE(a && b);
  EXPECT_EQ(a->job, 0);
  EXPECT_EQ(b->job, 1);
  EXPECT_FALSE(t.Lease("w3", kT0).has_value());
  EXPECT_FALSE(t.IsFinished(0));
  EXPECT_TRUE(t.Finish(0));
  EXPECT_TRUE(t.IsFinished(0));
  EXPECT_FALSE(t.IsFinished(1));
  EXPECT_FALSE(t.AllSettled());
  EXPECT_TRUE(t.Finish(1));
  EXPECT_TRUE(t.AllSettled());
  EXPECT_FALSE(t.Finish(1)) << "a second result for a finished job is a duplicate";
}

TEST(JobTableTest, ExpiredLeaseIsRequeuedThenFailsAfterMaxAttempts) {
  JobTable t(1, 2, 10);
  auto first = t.Lease("w1", kT0);
  ASSERT_TRUE(first);
  EXPECT_TRUE(t.ExpireLeases(kT0 + std::chrono::seconds(5)).empty());
  EXPECT_TRUE(t.Renew(0, first->lease_id, kT0 + std::chrono::seconds(5)));
  EXPECT_TRUE(t.ExpireLeases(kT0 + std::chrono::seconds(14)).empty()) << "renewal moved the deadline";
  auto expired = t.ExpireLeases(kT0 + std::chrono::seconds(16));
  ASSERT_EQ(expired.size(), 1u);
  EXPECT_FALSE(expired[0].failed);
  EXPECT_EQ(expired[0].worker, "w1");
  EXPECT_FALSE(t.Renew(0, first->lease_id, kT0 + std::chrono::seconds(16))) << "stale lease";
  auto second = t.Lease("w2", kT0 + std::chrono::seconds(20));
  ASSERT_TRUE(second);
  EXPECT_EQ(second->attempt, 2);
  expired = t.ExpireLeases(kT0 + std::chrono::seconds(40));
  ASSERT_EQ(expired.size(), 1u);
  EXPECT_TRUE(expired[0].failed);
  EXPECT_EQ(t.Count(JobState::kFailed), 1);
  EXPECT_TRUE(t.AllSettled());
}

TEST(JobTableTest, StaleLeaseMayStillDeliverTheResult) {
  JobTable t(1, 3, 1);
  auto first = t.Lease("slow", kT0);
  t.ExpireLeases(kT0 + std::chrono::seconds(2));
  auto second = t.Lease("fast", kT0 + std::chrono::seconds(2));
  ASSERT_TRUE(first && second);
  EXPECT_TRUE(t.Finish(0));  // the slow worker's result arrives first: accepted
  EXPECT_FALSE(t.Renew(0, second->lease_id, kT0 + std::chrono::seconds(3))) << "tell the other to stop";
}

TEST(JobTableTest, DeterministicFailureFailsAtOnceAndReturnDoesNotCountAnAttempt) {
  JobTable t(2, 3, 10);
  auto a = t.Lease("w", kT0);
  EXPECT_TRUE(t.Fail(a->job, a->lease_id, "diverged", true));
  EXPECT_EQ(t.Snapshot()[0].cause, "diverged");
  auto b = t.Lease("w", kT0);
  ASSERT_TRUE(b);
  EXPECT_EQ(b->job, 1);
  t.Return(b->job, b->lease_id);
  EXPECT_EQ(t.Snapshot()[1].state, JobState::kQueued);
  EXPECT_EQ(t.Snapshot()[1].attempts, 0);
  EXPECT_FALSE(t.Fail(1, 12345, "stale", false)) << "not the current lease: ignored";
}

TEST(JobTableTest, ResumedJobsAreNotLeasedAgain) {
  JobTable t(3, 3, 10);
  t.MarkFinished(0);
  t.MarkFinished(2);
  auto l = t.Lease("w", kT0);
  ASSERT_TRUE(l);
  EXPECT_EQ(l->job, 1);
  EXPECT_FALSE(t.Lease("w", kT0).has_value());
}

}  // namespace job_table_test
}  // namespace chorus

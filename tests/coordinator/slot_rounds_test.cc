#include "coordinator/slot_rounds.h"

#include <gtest/gtest.h>

namespace chorus {
namespace slot_rounds_test {

TEST(IdleSlotAdviceTest, FullRoundsNeedNoAdvice) {
  EXPECT_EQ(IdleSlotAdvice(4, 2), "");
  EXPECT_EQ(IdleSlotAdvice(6, 3), "");
  EXPECT_EQ(IdleSlotAdvice(7, 1), "");  // one slot is always full
  EXPECT_EQ(IdleSlotAdvice(0, 4), "");  // nothing to run
  EXPECT_EQ(IdleSlotAdvice(33, 2), "");  // 17 rounds, 1 slot idle in one: 3% of the slot time
}

// 5 jobs on 2 slots: rounds {2, 2, 1}, one slot idle in the last; 4 or 6 fill every round.
TEST(IdleSlotAdviceTest, APartLastRoundNamesTheIdleSlotsAndTheFullCounts) {
  EXPECT_EQ(IdleSlotAdvice(5, 2),
            "5 jobs on 2 slots: the last of 3 rounds leaves 1 slot(s) idle; 4 or 6 jobs would fill every round");
  // 10 jobs on 16 cores' slots: a single round with 6 slots idle.
  EXPECT_EQ(IdleSlotAdvice(10, 16),
            "10 job(s) on 16 slots: 6 slot(s) idle throughout; 16 jobs would take about the same wall time");
  EXPECT_EQ(IdleSlotAdvice(9, 4),
            "9 jobs on 4 slots: the last of 3 rounds leaves 3 slot(s) idle; 8 or 12 jobs would fill every round");
}

}  // namespace slot_rounds_test
}  // namespace chorus

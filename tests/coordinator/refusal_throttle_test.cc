// RefusalThrottle: one event per kind, peer address and window, with the refusals in between
// counted; gRPC peer strings reduced to their address.
#include "coordinator/refusal_throttle.h"

#include <gtest/gtest.h>

namespace chorus {
namespace refusal_throttle_test {

using std::chrono::seconds;
const RefusalThrottle::TimePoint kT0 = std::chrono::steady_clock::time_point() + std::chrono::hours(1);

TEST(RefusalThrottleTest, OnlyTheFirstRefusalOfAWindowIsLoggedAndCarriesTheCountBefore) {
  RefusalThrottle throttle(10.0, 100);
  RefusalThrottle::Verdict v = throttle.Count("call_refused", "10.0.0.1", kT0);
  EXPECT_TRUE(v.log);
  EXPECT_EQ(v.unlogged, 0);
  EXPECT_EQ(v.in_window, 1);
  for (int i = 2; i <= 1000; ++i) {
    v = throttle.Count("call_refused", "10.0.0.1", kT0 + std::chrono::milliseconds(i));
    EXPECT_FALSE(v.log);
    EXPECT_EQ(v.in_window, i);
  }
  // Another address and another kind have windows of their own.
  EXPECT_TRUE(throttle.Count("call_refused", "10.0.0.2", kT0 + seconds(1)).log);
  EXPECT_TRUE(throttle.Count("worker_unknown", "10.0.0.1", kT0 + seconds(1)).log);
  // The next window opens with an event counting the 999 left unlogged.
  v = throttle.Count("call_refused", "10.0.0.1", kT0 + seconds(10));
  EXPECT_TRUE(v.log);
  EXPECT_EQ(v.unlogged, 999);
  EXPECT_EQ(v.in_window, 1);
  EXPECT_FALSE(throttle.Count("call_refused", "10.0.0.1", kT0 + seconds(11)).log);
  const std::vector<RefusalThrottle::Unlogged> left = throttle.TakeUnlogged();
  ASSERT_EQ(left.size(), 1u);
  EXPECT_EQ(left[0].kind, "call_refused");
  EXPECT_EQ(left[0].address, "10.0.0.1");
  EXPECT_EQ(left[0].count, 1);
  EXPECT_TRUE(throttle.TakeUnlogged().empty());
}

TEST(RefusalThrottleTest, AddressesPastTheBoundShareOneCount) {
  RefusalThrottle throttle(10.0, 3);
  int logged = 0;
  for (int i = 0; i < 1000; ++i) logged += throttle.Count("call_refused", "10.0.1." + std::to_string(i), kT0).log;
  EXPECT_EQ(logged, 4) << "three addresses, then \"*\" for the rest";
  const std::vector<RefusalThrottle::Unlogged> left = throttle.TakeUnlogged();
  ASSERT_EQ(left.size(), 1u);
  EXPECT_EQ(left[0].address, "*");
  EXPECT_EQ(left[0].count, 1000 - 4);
}

TEST(RefusalThrottleTest, PeerAddressDropsTheSchemeAndThePort) {
  EXPECT_EQ(PeerAddress("ipv4:127.0.0.1:51234"), "127.0.0.1");
  EXPECT_EQ(PeerAddress("ipv6:[::1]:51234"), "::1");
  EXPECT_EQ(PeerAddress("ipv6:[fe80::1%eth0]:7"), "fe80::1%eth0");
  EXPECT_EQ(PeerAddress("unix:/tmp/socket"), "unix:/tmp/socket");
  EXPECT_EQ(PeerAddress(""), "");
}

}  // namespace refusal_throttle_test
}  // namespace chorus

// Which refused calls get a line in events.jsonl: refusals are counted per (kind, peer address)
// in fixed windows, and only the first refusal of a window is logged, carrying how many of that
// kind from that address went unlogged before it. A flood of refused calls therefore writes at
// most one event per kind, address and window, and the counts still add up. Pure bookkeeping
// with the clock passed in, so tests drive it without sleeping.
// Thread safety: all methods are safe to call concurrently (one internal mutex).
#pragma once

#include <chrono>
#include <cstddef>
#include <cstdint>
#include <map>
#include <mutex>
#include <string>
#include <utility>
#include <vector>

namespace chorus {

// The address part of a gRPC peer string: "ipv4:10.0.0.7:51234" -> "10.0.0.7",
// "ipv6:[::1]:51234" -> "::1"; any other form (e.g. "unix:/path") is returned whole.
std::string PeerAddress(const std::string& peer);

class RefusalThrottle {
 public:
  using TimePoint = std::chrono::steady_clock::time_point;

  // Windows of `window_seconds` (> 0), each starting at the first refusal after the last one
  // ended; at most `max_addresses` (>= 1) addresses are told apart per kind, the rest share the
  // address "*".
  RefusalThrottle(double window_seconds, size_t max_addresses);

  struct Verdict {
    bool log = false;        // this refusal opens a window: log it
    int64_t unlogged = 0;    // when `log`: refusals of this kind and address since its last event
    int64_t in_window = 0;   // refusals of this kind and address in the window, this one included
  };
  // Counts one refusal of `kind` from `address` at `now`.
  Verdict Count(const std::string& kind, const std::string& address, TimePoint now);

  struct Unlogged {
    std::string kind, address;
    int64_t count = 0;
  };
  // Every (kind, address) with refusals that got no event yet, and how many; they are then
  // counted as logged. For a closing summary.
  std::vector<Unlogged> TakeUnlogged();

 private:
  struct Window {
    TimePoint start;
    bool opened = false;     // false until the first refusal
    int64_t in_window = 0;
    int64_t unlogged = 0;
  };
  const std::chrono::steady_clock::duration window_;
  const size_t max_addresses_;
  std::mutex mu_;
  std::map<std::string, size_t> addresses_per_kind_;                        // guarded by mu_
  std::map<std::pair<std::string, std::string>, Window> windows_;           // guarded by mu_
};

}  // namespace chorus

#include "coordinator/refusal_throttle.h"

namespace chorus {

std::string PeerAddress(const std::string& peer) {
  const bool v4 = peer.rfind("ipv4:", 0) == 0, v6 = peer.rfind("ipv6:", 0) == 0;
  if (!v4 && !v6) return peer;
  std::string address = peer.substr(5);
  const size_t port = address.rfind(':');
  if (port != std::string::npos) address.resize(port);
  if (v6 && address.size() >= 2 && address.front() == '[' && address.back() == ']') {
    address = address.substr(1, address.size() - 2);
  }
  return address;
}

RefusalThrottle::RefusalThrottle(double window_seconds, size_t max_addresses)
    : window_(std::chrono::duration_cast<std::chrono::steady_clock::duration>(
          std::chrono::duration<double>(window_seconds))),
      max_addresses_(max_addresses) {}

RefusalThrottle::Verdict RefusalThrottle::Count(const std::string& kind, const std::string& address,
                                                TimePoint now) {
  std::lock_guard<std::mutex> lock(mu_);
  std::pair<std::string, std::string> key{kind, address};
  auto it = windows_.find(key);
  if (it == windows_.end()) {
    size_t& known = addresses_per_kind_[kind];
    if (known >= max_addresses_) key.second = "*";
    it = windows_.find(key);
    if (it == windows_.end()) {
      if (key.second != "*") ++known;
      it = windows_.emplace(key, Window{}).first;
    }
  }
  Window& w = it->second;
  Verdict verdict;
  if (!w.opened || now - w.start >= window_) {
    verdict.log = true;
    verdict.unlogged = w.unlogged;
    w = Window{now, true, 1, 0};
  } else {
    ++w.in_window;
    ++w.unlogged;
  }
  verdict.in_window = w.in_window;
  return verdict;
}

std::vector<RefusalThrottle::Unlogged> RefusalThrottle::TakeUnlogged() {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<Unlogged> out;
  for (auto& [key, w] : windows_) {
    if (w.unlogged == 0) continue;
    out.push_back({key.first, key.second, w.unlogged});
    w.unlogged = 0;
  }
  return out;
}

}  // namespace chorus

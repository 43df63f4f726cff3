#include "coordinator/upload_slots.h"

#include <algorithm>

namespace chorus {

UploadSlots::UploadSlots(int max, double idle_seconds)
    : max_(max),
      idle_(std::chrono::duration_cast<SteadyClock::duration>(std::chrono::duration<double>(idle_seconds))),
      watchdog_([this] { Watch(); }) {}

UploadSlots::~UploadSlots() {
  {
    std::lock_guard<std::mutex> lock(mu_);
    stopping_ = true;
  }
  wake_.notify_all();
  watchdog_.join();
}

std::unique_ptr<UploadSlots::Slot> UploadSlots::Acquire(std::function<void()> cancel) {
  std::lock_guard<std::mutex> lock(mu_);
  if (static_cast<int>(streams_.size()) >= max_) return nullptr;
  const uint64_t id = next_id_++;
  streams_.emplace(id, Stream{SteadyClock::now(), std::move(cancel), false});
  return std::unique_ptr<Slot>(new Slot(this, id));
}

int UploadSlots::held() const {
  std::lock_guard<std::mutex> lock(mu_);
  return static_cast<int>(streams_.size());
}

UploadSlots::Slot::~Slot() {
  std::lock_guard<std::mutex> lock(owner_->mu_);
  owner_->streams_.erase(id_);
}

void UploadSlots::Slot::Touch() {
  std::lock_guard<std::mutex> lock(owner_->mu_);
  owner_->streams_.at(id_).last_activity = SteadyClock::now();
}

bool UploadSlots::Slot::cancelled_for_idling() const {
  std::lock_guard<std::mutex> lock(owner_->mu_);
  return owner_->streams_.at(id_).cancelled;
}

// Checks four times per idle bound (at least every 10 ms, at most every second), so a stream is
// cancelled within a quarter of the bound after it ran out.
void UploadSlots::Watch() {
  const SteadyClock::duration period = std::clamp<SteadyClock::duration>(
      idle_ / 4, std::chrono::milliseconds(10), std::chrono::seconds(1));
  std::unique_lock<std::mutex> lock(mu_);
  while (!wake_.wait_for(lock, period, [this] { return stopping_; })) {
    const SteadyClock::time_point now = SteadyClock::now();
    for (auto& [id, stream] : streams_) {
      if (stream.cancelled || now - stream.last_activity < idle_) continue;
      stream.cancelled = true;
      stream.cancel();
    }
  }
}

}  // namespace chorus

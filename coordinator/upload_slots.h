// The UploadResult streams the coordinator serves at once. gRPC's sync server gives every open
// stream a handler thread blocked in Read, so streams that are opened and never finished would
// pile up threads and starve honest workers: at most `max` streams hold a slot, and a watchdog
// thread cancels any stream that has received nothing for `idle_seconds`.
// Thread safety: all methods are safe to call concurrently; a Slot is used by its stream's
// handler thread alone.
#pragma once

#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <thread>

namespace chorus {

class UploadSlots {
 public:
  // `max` >= 1 streams at once; `idle_seconds` > 0. Starts the watchdog thread.
  UploadSlots(int max, double idle_seconds);
  // Stops the watchdog. Every Slot must have been released before.
  ~UploadSlots();
  UploadSlots(const UploadSlots&) = delete;
  UploadSlots& operator=(const UploadSlots&) = delete;

  // One stream's hold on a slot, released when destroyed.
  class Slot {
   public:
    ~Slot();
    Slot(const Slot&) = delete;
    Slot& operator=(const Slot&) = delete;
    // The stream received something: its idle time starts again.
    void Touch();
    // Whether the watchdog cancelled the stream for idling.
    bool cancelled_for_idling() const;

   private:
    friend class UploadSlots;
    Slot(UploadSlots* owner, uint64_t id) : owner_(owner), id_(id) {}
    UploadSlots* owner_;
    uint64_t id_;
  };

  // A slot for a new stream, or nullptr when `max` are held. If the stream idles past the bound,
  // the watchdog calls `cancel` once, under the slots' lock (so never after the slot is
  // released); `cancel` must not block or call back into UploadSlots.
  std::unique_ptr<Slot> Acquire(std::function<void()> cancel);

  // Slots held now.
  int held() const;

 private:
  using SteadyClock = std::chrono::steady_clock;
  struct Stream {
    SteadyClock::time_point last_activity;
    std::function<void()> cancel;
    bool cancelled = false;
  };
  void Watch();

  const int max_;
  const SteadyClock::duration idle_;
  mutable std::mutex mu_;
  std::condition_variable wake_;
  std::map<uint64_t, Stream> streams_;  // guarded by mu_
  uint64_t next_id_ = 0;                // guarded by mu_
  bool stopping_ = false;               // guarded by mu_
  std::thread watchdog_;
};

}  // namespace chorus

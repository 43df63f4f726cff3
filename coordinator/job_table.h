// The coordinator's job table: which jobs are queued, leased (to whom, until when),
// finished or failed, and how many attempts each has used. Pure bookkeeping with the clock passed
// in, so tests drive it without sleeping; the gRPC service and events sit around it.
// Thread safety: all methods are safe to call concurrently (one internal mutex).
#pragma once

#include <chrono>
#include <cstdint>
#include <mutex>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace chorus {

enum class JobState { kQueued, kLeased, kFinished, kFailed };
const char* JobStateName(JobState s);

using Clock = std::chrono::steady_clock;

struct JobLease {
  int job = 0;
  uint64_t lease_id = 0;
  int attempt = 0;   // 1-based attempt this lease starts
};

// What happened to a lease that ran past its deadline.
struct ExpiredLease {
  int job = 0;
  std::string worker;
  bool failed = false;  // true: attempts used up, the job is now failed
};

struct JobSnapshot {
  JobState state = JobState::kQueued;
  int attempts = 0;
  std::string worker;   // holder of the current lease, if leased
  std::string cause;    // why it failed, if failed
};

class JobTable {
 public:
  // `jobs` jobs, all queued; a lease lasts `lease_seconds` from its last renewal; a job fails after
  // `max_attempts` leases that ended without a result.
  JobTable(int jobs, int max_attempts, double lease_seconds);

  // Appends `jobs` queued jobs (the next stage of a run); returns the index of the first.
  int AddJobs(int jobs);

  // Marks a job finished before any leasing (its result was found on disk when resuming).
  void MarkFinished(int job);

  // Leases the lowest-numbered queued job to `worker`, or returns nullopt if none is queued.
  std::optional<JobLease> Lease(const std::string& worker, Clock::time_point now);

  // Extends the lease; false if (job, lease_id) is not the job's current lease.
  bool Renew(int job, uint64_t lease_id, Clock::time_point now);

  // Whether `worker` was ever given `lease_id` for `job` (current or stale): the service accepts a
  // job's result only from a worker it leased the job to.
  bool WasLeasedTo(int job, uint64_t lease_id, const std::string& worker) const;

  // Records a result for `job` from any lease, current or stale (results are deterministic).
  // Returns false if the job was already finished (the caller compares and drops the duplicate).
  bool Finish(int job);

  // The current lease of `job` ended without a result. deterministic: retrying cannot help, so
  // the job fails now; otherwise it is queued again unless its attempts are used up. Returns true
  // if the job is now failed. Ignored (returns false) for a lease that is not current.
  bool Fail(int job, uint64_t lease_id, const std::string& cause, bool deterministic);

  // The worker gives the job back (shutting down): queued again, the attempt not counted.
  void Return(int job, uint64_t lease_id);

  // Re-queues or fails every lease whose deadline is before `now`.
  std::vector<ExpiredLease> ExpireLeases(Clock::time_point now);

  bool AllSettled() const;  // every job finished or failed
  // Whether job `job` has finished; O(1), unlike Snapshot(), so an upload can ask it (copying the
  // table per upload made a 100,000-job run quadratic: bench/many_workers.cc).
  bool IsFinished(int job) const;
  int Count(JobState s) const;
  std::vector<JobSnapshot> Snapshot() const;

 private:
  struct Job {
    JobState state = JobState::kQueued;
    int attempts = 0;
    uint64_t lease_id = 0;
    std::string worker;
    Clock::time_point deadline;
    std::string cause;
    std::vector<std::pair<uint64_t, std::string>> issued;  // every (lease id, worker) so far
  };
  bool IsCurrent(const Job& j, uint64_t lease_id) const {
    return j.state == JobState::kLeased && j.lease_id == lease_id;
  }
  // A random, non-zero 64-bit id (OpenSSL's generator), so a worker cannot guess another's lease.
  static uint64_t NewLeaseId();
  // Ends a job's current lease: failed if out of attempts (or deterministic), else queued.
  bool EndLease(Job& j, const std::string& cause, bool deterministic);

  const int max_attempts_;
  const Clock::duration lease_;
  mutable std::mutex mu_;
  std::vector<Job> jobs_;   // guarded by mu_
};

}  // namespace chorus

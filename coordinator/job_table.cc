#include "coordinator/job_table.h"

#include <openssl/rand.h>

#include <algorithm>
#include <stdexcept>

namespace chorus {

const char* JobStateName(JobState s) {
  switch (s) {
    case JobState::kQueued: return "queued";
    case JobState::kLeased: return "leased";
    case JobState::kFinished: return "finished";
    case JobState::kFailed: return "failed";
  }
  return "?";
}

JobTable::JobTable(int jobs, int max_attempts, double lease_seconds)
    : max_attempts_(max_attempts),
      lease_(std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(lease_seconds))),
      jobs_(static_cast<size_t>(jobs)) {}

int JobTable::AddJobs(int jobs) {
  std::lock_guard<std::mutex> lock(mu_);
  const int first = static_cast<int>(jobs_.size());
  jobs_.resize(jobs_.size() + static_cast<size_t>(jobs));
  return first;
}

uint64_t JobTable::NewLeaseId() {
  uint64_t id = 0;
  while (id == 0) {
    if (RAND_bytes(reinterpret_cast<unsigned char*>(&id), sizeof id) != 1) {
      throw std::runtime_error("no random bytes for a lease id");
    }
  }
  return id;
}

bool JobTable::WasLeasedTo(int job, uint64_t lease_id, const std::string& worker) const {
  std::lock_guard<std::mutex> lock(mu_);
  const std::vector<std::pair<uint64_t, std::string>>& issued = jobs_[job].issued;
  return std::find(issued.begin(), issued.end(), std::make_pair(lease_id, worker)) != issued.end();
}

void JobTable::MarkFinished(int job) {
  std::lock_guard<std::mutex> lock(mu_);
  jobs_[job].state = JobState::kFinished;
}

std::optional<JobLease> JobTable::Lease(const std::string& worker, Clock::time_point now) {
  std::lock_guard<std::mutex> lock(mu_);
  for (size_t i = 0; i < jobs_.size(); ++i) {
    Job& j = jobs_[i];
    if (j.state != JobState::kQueued) continue;
    j.state = JobState::kLeased;
    j.lease_id = NewLeaseId();
    j.worker = worker;
    j.issued.emplace_back(j.lease_id, worker);
    j.deadline = now + lease_;
    ++j.attempts;
    return JobLease{static_cast<int>(i), j.lease_id, j.attempts};
  }
  return std::nullopt;
}

bool JobTable::Renew(int job, uint64_t lease_id, Clock::time_point now) {
  std::lock_guard<std::mutex> lock(mu_);
  Job& j = jobs_[job];
  if (!IsCurrent(j, lease_id)) return false;
  j.deadline = now + lease_;
  return true;
}

bool JobTable::Finish(int job) {
  std::lock_guard<std::mutex> lock(mu_);
  Job& j = jobs_[job];
  if (j.state == JobState::kFinished) return false;
  j.state = JobState::kFinished;
  j.worker.clear();
  j.cause.clear();
  return true;
}

bool JobTable::EndLease(Job& j, const std::string& cause, bool deterministic) {
  j.worker.clear();
  j.cause = cause;
  const bool failed = deterministic || j.attempts >= max_attempts_;
  j.state = failed ? JobState::kFailed : JobState::kQueued;
  return failed;
}

bool JobTable::Fail(int job, uint64_t lease_id, const std::string& cause, bool deterministic) {
  std::lock_guard<std::mutex> lock(mu_);
  Job& j = jobs_[job];
  if (!IsCurrent(j, lease_id)) return false;
  return EndLease(j, cause, deterministic);
}

void JobTable::Return(int job, uint64_t lease_id) {
  std::lock_guard<std::mutex> lock(mu_);
  Job& j = jobs_[job];
  if (!IsCurrent(j, lease_id)) return;
  j.state = JobState::kQueued;
  j.worker.clear();
  --j.attempts;
}

std::vector<ExpiredLease> JobTable::ExpireLeases(Clock::time_point now) {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<ExpiredLease> expired;
  for (size_t i = 0; i < jobs_.size(); ++i) {
    Job& j = jobs_[i];
    if (j.state != JobState::kLeased || j.deadline >= now) continue;
    const std::string worker = j.worker;
    const bool failed = EndLease(j, "lease expired " + std::to_string(j.attempts) + " time(s)", false);
    expired.push_back({static_cast<int>(i), worker, failed});
  }
  return expired;
}

bool JobTable::AllSettled() const {
  std::lock_guard<std::mutex> lock(mu_);
  for (const Job& j : jobs_) {
    if (j.state == JobState::kQueued || j.state == JobState::kLeased) return false;
  }
  return true;
}

int JobTable::Count(JobState s) const {
  std::lock_guard<std::mutex> lock(mu_);
  int n = 0;
  for (const Job& j : jobs_) n += j.state == s;
  return n;
}

bool JobTable::IsFinished(int job) const {
  std::lock_guard<std::mutex> lock(mu_);
  return jobs_[job].state == JobState::kFinished;
}

std::vector<JobSnapshot> JobTable::Snapshot() const {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<JobSnapshot> out;
  for (const Job& j : jobs_) out.push_back({j.state, j.attempts, j.worker, j.cause});
  return out;
}

}  // namespace chorus

// The coordinator's progress display while workers train: on a terminal a live block (jobs
// done/total, ETA, one line per worker: host, job, epoch, loss, samples/s), redrawn in place;
// otherwise one plain summary line every `plain_interval_seconds`.
// Thread safety: use from one thread.
#pragma once

#include <chrono>
#include <cstdio>
#include <map>
#include <vector>

#include "coordinator/coordinator_service.h"
#include "coordinator/job_table.h"

namespace chorus {

class ProgressView {
 public:
  ProgressView(FILE* out, int jobs, double plain_interval_seconds = 10);

  // Redraws (terminal) or prints a line if the interval has passed (plain).
  void Update(const std::vector<JobSnapshot>& jobs, const std::map<std::string, WorkerView>& workers);
  // Final summary line.
  void Finish(const std::vector<JobSnapshot>& jobs);

 private:
  std::string Summary(const std::vector<JobSnapshot>& jobs, const std::map<std::string, WorkerView>& workers) const;

  FILE* out_;
  bool live_;
  int jobs_;
  double plain_interval_;
  int lines_drawn_ = 0;
  std::chrono::steady_clock::time_point start_, last_plain_;
};

}  // namespace chorus

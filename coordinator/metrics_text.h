// The coordinator's state as Prometheus text-format metrics (exposition format 0.0.4): jobs by
// state, leases held, retries, workers, the training rate the workers last reported, refused
// calls and open uploads. Thread safety: a pure function.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "coordinator/coordinator_service.h"
#include "coordinator/job_table.h"

namespace chorus {

struct CoordinatorCounts {
  std::vector<JobSnapshot> jobs;            // every job of the run so far
  std::map<std::string, WorkerView> workers;  // every registered worker
  int refused_calls = 0;                    // calls refused for a missing or wrong token
  int uploads_open = 0;
};

// The metrics page: "# HELP" and "# TYPE" lines, then one sample per line; names start with
// "chorus_".
std::string PrometheusText(const CoordinatorCounts& counts);

}  // namespace chorus

#include "coordinator/metrics_text.h"

#include <charconv>

namespace chorus {
namespace metrics_text {

std::string Number(double v) {
  char buf[32];
  const auto end = std::to_chars(buf, buf + sizeof buf, v).ptr;  // shortest exact form
  return std::string(buf, end);
}

void Family(std::string* out, const char* name, const char* type, const char* help) {
  *out += std::string("# HELP ") + name + " " + help + "\n# TYPE " + name + " " + type + "\n";
}

void Sample(std::string* out, const std::string& name_and_labels, double value) {
  *out += name_and_labels + " " + Number(value) + "\n";
}

}  // namespace metrics_text

std::string PrometheusText(const CoordinatorCounts& c) {
  std::map<JobState, int> by_state = {
      {JobState::kQueued, 0}, {JobState::kLeased, 0}, {JobState::kFinished, 0}, {JobState::kFailed, 0}};
  long long retries = 0;
  for (const JobSnapshot& j : c.jobs) {
    ++by_state[j.state];
    if (j.attempts > 1) retries += j.attempts - 1;
  }
  int busy = 0;
  double samples_per_second = 0;
  for (const auto& [id, w] : c.workers) {
    if (w.job.empty()) continue;
    ++busy;
    samples_per_second += w.samples_per_second;
  }
  std::string out;
  metrics_text::Family(&out, "chorus_jobs", "gauge", "Jobs of this run by state.");
  for (const auto& [state, n] : by_state) {
    metrics_text::Sample(&out, std::string("chorus_jobs{state=\"") + JobStateName(state) + "\"}", n);
  }
  metrics_text::Family(&out, "chorus_leases_active", "gauge", "Leases held by workers now (jobs in the leased state).");
  metrics_text::Sample(&out, "chorus_leases_active", by_state[JobState::kLeased]);
  metrics_text::Family(&out, "chorus_job_retries_total", "counter",
         "Leases beyond each job's first: leases that expired, were returned, or whose worker reported a failure.");
  metrics_text::Sample(&out, "chorus_job_retries_total", static_cast<double>(retries));
  metrics_text::Family(&out, "chorus_workers", "gauge", "Registered workers, busy (holding a lease) or idle.");
  metrics_text::Sample(&out, "chorus_workers{state=\"busy\"}", busy);
  metrics_text::Sample(&out, "chorus_workers{state=\"idle\"}", static_cast<double>(c.workers.size()) - busy);
  metrics_text::Family(&out, "chorus_training_samples_per_second", "gauge",
         "Training samples per second, summed over the busy workers' last heartbeats.");
  metrics_text::Sample(&out, "chorus_training_samples_per_second", samples_per_second);
  metrics_text::Family(&out, "chorus_refused_calls_total", "counter", "Calls refused for a missing or wrong token.");
  metrics_text::Sample(&out, "chorus_refused_calls_total", c.refused_calls);
  metrics_text::Family(&out, "chorus_uploads_open", "gauge", "Result uploads in progress.");
  metrics_text::Sample(&out, "chorus_uploads_open", c.uploads_open);
  return out;
}

}  // namespace chorus

#include "coordinator/progress_view.h"

#include <unistd.h>

#include <string>

#include "common/log_format.h"

namespace chorus {
namespace {

double Seconds(std::chrono::steady_clock::duration d) { return std::chrono::duration<double>(d).count(); }

}  // namespace

ProgressView::ProgressView(FILE* out, int jobs, double plain_interval_seconds)
    : out_(out), live_(isatty(fileno(out)) != 0 && GetLogFormat() == LogFormat::kText), jobs_(jobs),
      plain_interval_(plain_interval_seconds),
      start_(std::chrono::steady_clock::now()), last_plain_(start_) {}

std::string ProgressView::Summary(const std::vector<JobSnapshot>& jobs,
                                  const std::map<std::string, WorkerView>& workers) const {
  int finished = 0, failed = 0, leased = 0;
  for (const JobSnapshot& j : jobs) {
    finished += j.state == JobState::kFinished;
    failed += j.state == JobState::kFailed;
    leased += j.state == JobState::kLeased;
  }
  // Work done = settled jobs plus the epoch fraction of running ones.
  double done = finished + failed;
  for (const auto& [id, w] : workers) {
    if (!w.job.empty() && w.epochs > 0) done += static_cast<double>(w.epoch) / w.epochs;
  }
  const double elapsed = Seconds(std::chrono::steady_clock::now() - start_);
  char buf[256];
  if (done > 0) {
    std::snprintf(buf, sizeof buf, "jobs %d/%d finished, %d running, %d failed; %.0fs elapsed, eta %.0fs",
                  finished, jobs_, leased, failed, elapsed, elapsed / done * (jobs_ - done));
  } else {
    std::snprintf(buf, sizeof buf, "jobs %d/%d finished, %d running, %d failed; %.0fs elapsed",
                  finished, jobs_, leased, failed, elapsed);
  }
  return buf;
}

void ProgressView::Update(const std::vector<JobSnapshot>& jobs,
                          const std::map<std::string, WorkerView>& workers) {
  const std::string summary = Summary(jobs, workers);
  if (!live_) {
    if (Seconds(std::chrono::steady_clock::now() - last_plain_) < plain_interval_) return;
    last_plain_ = std::chrono::steady_clock::now();
    LogLine(out_, LogLevel::kInfo, summary, {{"workers", workers.size()}});
    return;
  }
  if (lines_drawn_ > 0) std::fprintf(out_, "\033[%dA", lines_drawn_);
  std::fprintf(out_, "\r\033[K%s\n", summary.c_str());
  lines_drawn_ = 1;
  for (const auto& [id, w] : workers) {
    if (w.job.empty()) {
      std::fprintf(out_, "\033[K  %-4s %-20s idle\n", id.c_str(), w.host.c_str());
    } else {
      std::fprintf(out_, "\033[K  %-4s %-20s job %-4s epoch %3d/%-3d loss %.4f  %.0f samples/s\n",
                   id.c_str(), w.host.c_str(), w.job.c_str(), w.epoch, w.epochs, w.loss,
                   w.samples_per_second);
    }
    ++lines_drawn_;
  }
  std::fflush(out_);
}

void ProgressView::Finish(const std::vector<JobSnapshot>& jobs) {
  lines_drawn_ = 0;
  LogLine(out_, LogLevel::kInfo, Summary(jobs, {}));
}

}  // namespace chorus

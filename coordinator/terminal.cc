#include "coordinator/terminal.h"

#include <unistd.h>

#include <sstream>
#include <iomanip>

#include "common/assembly.h"
#include "common/log_format.h"
#include "report/report_model.h"

namespace chorus {

ProgressPrinter::ProgressPrinter(FILE* out, int members, int epochs)
    : out_(out), live_(isatty(fileno(out)) != 0 && GetLogFormat() == LogFormat::kText),
      members_(members), epochs_(epochs), start_(std::chrono::steady_clock::now()) {}

void ProgressPrinter::OnEpoch(const EpochProgress& p) {
  ++epochs_seen_;
  const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
  const double total = static_cast<double>(members_) * epochs_;
  const double eta = elapsed / static_cast<double>(epochs_seen_) * (total - epochs_seen_);
  if (live_) {
    std::fprintf(out_, "\r\033[K[%d/%d members done] member %d epoch %d/%d loss %.4f  eta %.0fs",
                 done_, members_, p.member, p.epoch, p.epochs, p.mean_loss, eta);
  } else {
    char text[160];
    std::snprintf(text, sizeof text, "member %d epoch %d/%d loss %.6f (%.0f%% of all epochs, eta %.0fs)",
                  p.member, p.epoch, p.epochs, p.mean_loss, 100.0 * epochs_seen_ / total, eta);
    LogLine(out_, LogLevel::kInfo, text, {{"member", p.member}, {"epoch", p.epoch},
                                          {"epochs", p.epochs}, {"loss", p.mean_loss}, {"eta_s", eta}});
  }
  std::fflush(out_);
}

void ProgressPrinter::OnMemberDone(int member, const Status& status) {
  ++done_;
  if (!status.ok()) ++failed_;
  if (live_) std::fputs("\r\033[K", out_);
  if (status.ok()) {
    LogPrintf(out_, LogLevel::kInfo, "member %d finished (%d/%d)", member, done_, members_);
  } else {
    LogLine(out_, LogLevel::kError, "member " + std::to_string(member) + " FAILED: " + status.ToString(),
            {{"member", member}, {"cause", status.ToString()}});
  }
  std::fflush(out_);
}

void ProgressPrinter::Finish() {
  const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
  LogPrintf(out_, LogLevel::kInfo, "trained %d of %d members in %.1fs (%d failed)", done_ - failed_,
            members_, elapsed, failed_);
}

namespace {

void Row(std::ostringstream& s, const std::string& label, Task task, const Scores& sc) {
  s << std::left << std::setw(34) << label << std::right << std::fixed << std::setprecision(4);
  if (task == Task::kClassification) {
    const ClassificationMetrics& c = sc.classification;
    s << std::setw(10) << c.accuracy << std::setw(10) << c.nll << std::setw(10) << c.brier
      << std::setw(10) << c.ece << "\n";
  } else {
    const RegressionMetrics& r = sc.regression;
    s << std::setw(10) << r.rmse << std::setw(10) << r.nll << std::setw(12) << r.coverage_90 << "\n";
  }
}

}  // namespace

std::string SummaryTable(const EnsembleEvaluation& ev, const BaselineEvaluation* baseline) {
  std::ostringstream s;
  s << std::left << std::setw(34) << "test set" << std::right;
  if (ev.task == Task::kClassification) {
    s << std::setw(10) << "accuracy" << std::setw(10) << "nll" << std::setw(10) << "brier"
      << std::setw(10) << "ece" << "\n";
  } else {
    s << std::setw(10) << "rmse" << std::setw(10) << "nll" << std::setw(12) << "coverage_90" << "\n";
  }
  const MemberScores& best = ev.members[ev.best_member];
  Row(s, "mean member (of " + std::to_string(ev.members.size()) + ")", ev.task, ev.mean_member);
  Row(s, "best member (" + std::to_string(best.index) + ", by validation nll)", ev.task, best.test);
  if (ev.test_without_basin) Row(s, "trained points only, tuned T", ev.task, *ev.test_without_basin);
  Row(s, "ensemble, T = 1", ev.task, ev.test_uncalibrated);
  std::ostringstream t;
  t << std::setprecision(3) << std::fixed << ev.temperature;
  Row(s, "ensemble, tuned T = " + t.str(), ev.task, ev.test);
  if (baseline != nullptr && baseline->skipped.empty()) {
    std::ostringstream b;
    b << std::setprecision(3) << std::fixed << baseline->temperature;
    Row(s, "linear baseline, tuned T = " + b.str(), ev.task, baseline->test);
  }
  if (ev.bayes_optimal_test_nll) {
    s << std::fixed << std::setprecision(4) << "Bayes-optimal test nll (true probabilities known): "
      << *ev.bayes_optimal_test_nll << "\n";
  }
  if (ev.tuned_temperature && AtTuningRangeEnd(ev.temperature)) s << TemperatureAtRangeEndWarning() << "\n";
  if (baseline != nullptr) s << BaselineVerdict(ev, *baseline) << "\n";
  return s.str();
}

}  // namespace chorus

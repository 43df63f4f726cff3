// What `chorus run` shows on the terminal: progress while members train (a live line on a TTY,
// plain lines otherwise) and the closing comparison table. Thread safety: ProgressPrinter methods
// must be called one at a time (the local trainer serialises its callbacks).
#pragma once

#include <chrono>
#include <cstdio>
#include <string>

#include "common/baseline_evaluation.h"
#include "common/ensemble_evaluation.h"
#include "common/member_training.h"

namespace chorus {

class ProgressPrinter {
 public:
  // Writes to `out`; live mode when `out` is a terminal.
  ProgressPrinter(FILE* out, int members, int epochs);

  void OnEpoch(const EpochProgress& p);
  void OnMemberDone(int member, const Status& status);
  void Finish();

 private:
  FILE* out_;
  bool live_;
  int members_, epochs_, done_ = 0, failed_ = 0;
  long epochs_seen_ = 0;
  std::chrono::steady_clock::time_point start_;
};

// The closing table: mean member, best member, ensemble before and after temperature and, when
// given and fitted, the linear baseline, on test; then the verdict of BaselineVerdict
// (report/report_model.h).
std::string SummaryTable(const EnsembleEvaluation& ev, const BaselineEvaluation* baseline = nullptr);

}  // namespace chorus

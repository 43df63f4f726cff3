// Carrying out a run's plan (coordinator/run_plan.h) with a JobRunner: search, folds, members,
// each stage skipping the jobs whose results are already on disk (resume), then reading the
// results back and giving every member its out-of-fold validation outputs when cross-fitting.
// Thread safety: call from one thread.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "coordinator/job_runner.h"
#include "coordinator/run_directory.h"
#include "coordinator/run_plan.h"

namespace chorus {

struct TrainedRun {
  // The config the members were trained with: the run's, with the search's chosen point.
  Config chosen;
  std::optional<SearchOutcome> search;      // with a search grid
  // Finished members in member order. When cross-fitting, each carries the out-of-fold outputs
  // of its fold jobs as validation outputs (common/folds.h AdoptOutOfFoldOutputs).
  std::vector<MemberResult> members;
  // When cross-fitting: the fold assignment and, per finished member, its fold jobs (k-th = the
  // job without fold k), which basin-scale tuning redraws from.
  std::vector<int> fold_of_row;
  std::vector<std::vector<MemberResult>> member_folds;
  // When cross-fitting: per member, the epoch its folds and itself were stopped at (0: the whole
  // schedule), and its first-pass fold jobs' held-out NLL curves.
  std::vector<int> stop_epochs;
  std::vector<std::vector<std::vector<double>>> fold_curves;
  std::vector<std::string> failures;        // "member i: cause" for members that did not finish
};

// Runs every stage. Errors: the runner's (it cannot go on), an unreadable result on disk, or a
// search whose every point failed.
StatusOr<TrainedRun> TrainRun(const Config& config, const PreparedData& data,
                              const std::string& config_hash, RunDirectory& dir, JobRunner& runner);

}  // namespace chorus

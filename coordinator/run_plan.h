// The stages of a run and how each stage's results shape the next. Every spec is a pure function
// of (config, data, earlier results), so a resumed run plans exactly the jobs it planned before.
//   1. search (config.search not empty): one job per grid point (and per fold when
//      cross-fitting), all on member 0's seed so that points differ only in their settings; the
//      point with the lowest validation NLL wins and its settings are used for every member.
//   2. folds (data.folds > 0): member i without fold k, for every member and fold; their
//      out-of-fold predictions cover every training row. With early stopping, the folds of a
//      member first run with it, recording their held-out NLL after every epoch; the one epoch
//      with the lowest NLL over all the member's held-out rows is then chosen, and the folds are
//      replayed to exactly that epoch (a second pass, same bits up to there). Letting each fold
//      stop where its own held-out rows were best would choose on the rows it then predicts,
//      and the out-of-fold NLL, the temperature fitted on it and the baseline comparison would
//      all be optimistic; one epoch per member, chosen on all rows, is one scalar like the
//      temperature.
//   3. members: member i on the whole training split, stopped at that epoch (it has no
//      validation rows of its own).
// Thread safety: free functions, reentrant.
#pragma once

#include <string>
#include <vector>

#include "common/config.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Whether `auto` settings treat the run's data as small (common/folds.h IsSmallData), counted
// before the holdout was split off.
bool RunDataIsSmall(const Config& config, const PreparedData& data);

// The seed of the run's fold assignment (common/folds.h AssignFolds).
uint64_t FoldSeed(const Config& config);

// Member i's spec with the config's settings: seed Derive(run.seed, i), early stopping resolved.
MemberSpec BaseSpec(const Config& config, const PreparedData& data, int member);

// One point of the search grid: the settings it changes.
struct GridPoint {
  std::vector<int> hidden;
  double lr = 0, weight_decay = 0, beta_nll = 0;
};

// The grid: the product of config.search's lists, each with the configured value first (added
// if the list lacks it; a missing list is the configured value alone), in the order hidden, lr,
// weight_decay, beta_nll, the last varying fastest. Empty without a search.
std::vector<GridPoint> SearchGrid(const Config& config);

// `config` with the point's settings.
Config WithPoint(Config config, const GridPoint& point);

// Stage 1: a job per grid point (and fold, with cross-fitting).
std::vector<MemberSpec> SearchSpecs(const Config& config, const PreparedData& data);

// The epoch (1-based) whose validation NLL, averaged over every row the jobs held out (each job's
// curve weighted by its rows), is lowest, and that NLL; curves are compared up to the shortest.
// Requires every job to have a validation curve.
struct JointEpoch {
  int epoch = 0;
  double validation_nll = 0;
};
JointEpoch BestJointEpoch(const std::vector<const MemberResult*>& jobs);

// A grid point's score: BestJointEpoch over its jobs (nats; regression on the standardised
// target); infinite if a job failed.
struct PointScore {
  GridPoint point;
  double validation_nll = 0;
  int best_epoch = 0;          // the joint best epoch
  std::string failure;         // why a job failed, or ""
};

struct SearchOutcome {
  std::vector<PointScore> points;
  int best = -1;               // index into points
};

// Scores every point from its jobs' results (results[i] for SearchSpecs(...)[i]; null where the
// job failed, causes[i] saying why). kInvalidInput naming the causes if every point failed.
StatusOr<SearchOutcome> ScoreSearch(const Config& config, const std::vector<const MemberResult*>& results,
                                    const std::vector<std::string>& causes);

// Stage 2: member i without fold k, i-major.
std::vector<MemberSpec> FoldSpecs(const Config& config, const PreparedData& data);

// Stage 2, second pass: the fold jobs of every member with stop_epochs[i] > 0 (its joint best
// epoch), replayed to that epoch without early stopping. JobName tells them apart.
std::vector<MemberSpec> FoldSpecsAt(const Config& config, const PreparedData& data,
                                    const std::vector<int>& stop_epochs);

// Stage 3: the members; stop_epochs[i] > 0 stops member i there (empty: none stop early).
std::vector<MemberSpec> MemberSpecs(const Config& config, const PreparedData& data,
                                    const std::vector<int>& stop_epochs);

}  // namespace chorus

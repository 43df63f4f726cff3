#include "coordinator/run_stages.h"

#include <filesystem>
#include <set>
#include <string>

#include "common/file_util.h"
#include "common/folds.h"
#include "common/log_format.h"
#include "coordinator/slot_rounds.h"
#include "proto/result_codec.h"

namespace chorus {
namespace {

// One stage's jobs after they ran: the result of each (nullopt if it failed) and why not.
struct StageResults {
  StageResults() = default;
  // members x folds empty slots, "not run" until Set.
  StageResults(int members, int folds)
      : results(static_cast<size_t>(members * folds)), causes(results.size(), "not run") {}
  void Set(int j, std::optional<MemberResult> r, const std::string& cause) {
    results[static_cast<size_t>(j)] = std::move(r);
    causes[static_cast<size_t>(j)] = cause;
  }
  std::vector<std::optional<MemberResult>> results;
  std::vector<std::string> causes;
  std::vector<const MemberResult*> Pointers() const {
    std::vector<const MemberResult*> out;
    for (const auto& r : results) out.push_back(r ? &*r : nullptr);
    return out;
  }
};

class StageRunner {
 public:
  // `slots`: jobs this machine runs at once, 0 when remote workers may add more.
  StageRunner(const PreparedData& data, const std::string& config_hash, RunDirectory& dir, JobRunner& runner,
              int slots)
      : data_(data), config_hash_(config_hash), dir_(dir), runner_(runner), slots_(slots) {}

  // Reads every spec's result already on disk (resume), runs the others, then reads theirs.
  StatusOr<StageResults> Run(const std::string& stage, const std::vector<MemberSpec>& specs) {
    StageResults out;
    std::vector<MemberSpec> pending;
    const std::map<std::string, nlohmann::json> logged = dir_.FinishedJobEvents();
    for (const MemberSpec& s : specs) {
      StatusOr<MemberResult> r = Load(s);
      if (!r.ok()) pending.push_back(s);
      // A coordinator stopped between storing a result and logging it: the result stands, and the
      // log gets the event it lacks, marked as recovered.
      if (r.ok() && logged.count(JobName(s)) == 0) dir_.LogJobEvent(s, false, {{"recovered", true}});
      out.results.push_back(r.ok() ? std::optional<MemberResult>(std::move(r).value()) : std::nullopt);
      out.causes.emplace_back();
    }
    dir_.LogEvent("stage_started", {{"stage", stage}, {"jobs", specs.size()},
                                    {"already_finished", specs.size() - pending.size()}});
    if (specs.empty()) return out;
    LogPrintf(stderr, LogLevel::kInfo, "%s: %zu jobs (%zu already finished)", stage.c_str(),
              specs.size(), specs.size() - pending.size());
    if (pending.empty()) return out;
    const std::string advice = IdleSlotAdvice(static_cast<int64_t>(pending.size()), slots_);
    if (!advice.empty()) LogPrintf(stderr, LogLevel::kInfo, "%s: %s", stage.c_str(), advice.c_str());
    CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> causes, runner_.Run(pending));
    size_t p = 0;
    for (size_t j = 0; j < specs.size(); ++j) {
      if (out.results[j]) continue;  // on disk before: the pending ones are the rest, in order
      if (!causes[p].empty()) {
        out.causes[j] = causes[p++];
        continue;
      }
      ++p;
      CHORUS_ASSIGN_OR_RETURN(MemberResult r, Load(specs[j]));
      out.results[j] = std::move(r);
    }
    return out;
  }

 private:
  StatusOr<MemberResult> Load(const MemberSpec& spec) const {
    const std::string path = dir_.JobResultPath(JobName(spec));
    if (!std::filesystem::exists(path)) return Status::InvalidInput(path + ": no result yet");
    CHORUS_ASSIGN_OR_RETURN(std::string bytes, ReadFileToString(path));
    return DecodeJobResult(bytes, path, data_.hash, config_hash_);
  }

  const PreparedData& data_;
  const std::string& config_hash_;
  RunDirectory& dir_;
  JobRunner& runner_;
  const int slots_;
};

// Whether every fold job of member i finished (results i-major, `folds` per member); if not,
// records the first failure. With `mine`, collects the member's results in fold order.
bool MemberFolds(const StageResults& r, int i, int folds, std::vector<std::string>& failures,
                 std::vector<const MemberResult*>* mine) {
  for (int k = 0; k < folds; ++k) {
    const size_t j = static_cast<size_t>(i * folds + k);
    if (!r.results[j]) {
      failures.push_back("member " + std::to_string(i) + ": fold " + std::to_string(k) + ": " + r.causes[j]);
      return false;
    }
    if (mine != nullptr) mine->push_back(&*r.results[j]);
  }
  return true;
}

// Stage 1: the grid, and the config with its best point.
Status Search(const Config& config, const PreparedData& data, StageRunner& stages, RunDirectory& dir,
              TrainedRun& run) {
  if (config.search.empty()) return Status::Ok();
  CHORUS_ASSIGN_OR_RETURN(StageResults r, stages.Run("search", SearchSpecs(config, data)));
  CHORUS_ASSIGN_OR_RETURN(SearchOutcome outcome, ScoreSearch(config, r.Pointers(), r.causes));
  const PointScore& best = outcome.points[outcome.best];
  run.chosen = WithPoint(config, best.point);
  dir.LogEvent("search_chosen", {{"point", outcome.best}, {"validation_nll", best.validation_nll}});
  LogPrintf(stderr, LogLevel::kInfo, "search: point %d of %zu chosen (validation nll %.4f)", outcome.best,
            outcome.points.size(), best.validation_nll);
  run.search = std::move(outcome);
  return Status::Ok();
}

// Stage 2: the fold jobs (twice with early stopping: recorded, then replayed to each member's
// joint best epoch). Sets folds_ok[i] false (with a failure) for members missing a fold; returns
// the results that hold the out-of-fold outputs, members x folds.
StatusOr<StageResults> CrossFit(const Config& chosen, const PreparedData& data, StageRunner& stages,
                                std::vector<bool>& folds_ok, TrainedRun& run) {
  const int members = chosen.ensemble.members;
  CHORUS_ASSIGN_OR_RETURN(StageResults folds, stages.Run("folds", FoldSpecs(chosen, data)));
  run.fold_of_row = AssignFolds(data.train, data.folds, FoldSeed(chosen));
  const bool early = BaseSpec(chosen, data, 0).train.early_stopping.mode == Switch::kOn;
  run.stop_epochs.assign(static_cast<size_t>(members), 0);
  run.fold_curves.resize(static_cast<size_t>(members));
  std::vector<int> members_with_folds;
  for (int i = 0; i < members; ++i) {
    std::vector<const MemberResult*> mine;
    folds_ok[i] = MemberFolds(folds, i, data.folds, run.failures, &mine);
    if (!folds_ok[i]) continue;
    members_with_folds.push_back(i);
    for (const MemberResult* f : mine) run.fold_curves[i].push_back(f->validation_nll);
    if (early) run.stop_epochs[i] = BestJointEpoch(mine).epoch;
  }
  if (!early) return folds;
  CHORUS_ASSIGN_OR_RETURN(StageResults replayed,
                          stages.Run("folds at the chosen epoch", FoldSpecsAt(chosen, data, run.stop_epochs)));
  StageResults full(members, data.folds);
  size_t j = 0;
  for (int i : members_with_folds) {
    for (int k = 0; k < data.folds; ++k, ++j) {
      full.Set(i * data.folds + k, std::move(replayed.results[j]), replayed.causes[j]);
    }
  }
  for (int i : members_with_folds) folds_ok[i] = MemberFolds(full, i, data.folds, run.failures, nullptr);
  return full;
}

// Stage 3: the members whose folds all finished; each finished member gets its out-of-fold
// outputs (moved out of `folds`) when cross-fitting.
Status TrainMembers(const Config& chosen, const PreparedData& data, StageRunner& stages,
                    const std::vector<bool>& folds_ok, StageResults& folds, TrainedRun& run) {
  std::vector<MemberSpec> specs;
  for (const MemberSpec& s : MemberSpecs(chosen, data, run.stop_epochs)) {
    if (folds_ok[s.index]) specs.push_back(s);
  }
  CHORUS_ASSIGN_OR_RETURN(StageResults trained, stages.Run("members", specs));
  for (size_t j = 0; j < specs.size(); ++j) {
    const int i = specs[j].index;
    if (!trained.results[j]) {
      run.failures.push_back("member " + std::to_string(i) + ": " + trained.causes[j]);
      continue;
    }
    MemberResult member = std::move(*trained.results[j]);
    if (data.folds > 0) {
      std::vector<MemberResult> mine;
      std::vector<const MemberResult*> pointers;
      for (int k = 0; k < data.folds; ++k) mine.push_back(std::move(*folds.results[static_cast<size_t>(i * data.folds + k)]));
      for (const MemberResult& f : mine) pointers.push_back(&f);
      AdoptOutOfFoldOutputs(run.fold_of_row, pointers, member);
      run.member_folds.push_back(std::move(mine));
    }
    run.members.push_back(std::move(member));
  }
  return Status::Ok();
}

}  // namespace

StatusOr<TrainedRun> TrainRun(const Config& config, const PreparedData& data,
                              const std::string& config_hash, RunDirectory& dir, JobRunner& runner) {
  TrainedRun run;
  run.chosen = config;
  StageRunner stages(data, config_hash, dir, runner,
                     config.cluster.listen.empty() ? JobsAtOnceOnThisMachine(config) : 0);
  CHORUS_RETURN_IF_ERROR(Search(config, data, stages, dir, run));
  std::vector<bool> folds_ok(static_cast<size_t>(run.chosen.ensemble.members), true);
  StageResults folds;
  if (data.folds > 0) {
    CHORUS_ASSIGN_OR_RETURN(folds, CrossFit(run.chosen, data, stages, folds_ok, run));
  }
  CHORUS_RETURN_IF_ERROR(TrainMembers(run.chosen, data, stages, folds_ok, folds, run));
  return run;
}

}  // namespace chorus

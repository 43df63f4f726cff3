#include "coordinator/run_plan.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "common/folds.h"
#include "common/rng.h"

namespace chorus {
namespace {

// Jobs that hold out each fold in turn, or one job on the holdout without folds.
std::vector<int> FoldsOf(const PreparedData& data) {
  if (data.folds == 0) return {-1};
  std::vector<int> folds(static_cast<size_t>(data.folds));
  for (int k = 0; k < data.folds; ++k) folds[k] = k;
  return folds;
}

// A searched list with the configured value first (added when the list lacks it), so the search
// can always keep the settings the config names.
template <typename T>
std::vector<T> WithConfigured(const std::vector<T>& values, const T& configured) {
  std::vector<T> out = {configured};
  for (const T& v : values) {
    if (!(v == configured)) out.push_back(v);
  }
  return out;
}


}  // namespace

uint64_t FoldSeed(const Config& config) { return Derive(config.run.seed, "folds"); }

bool RunDataIsSmall(const Config& config, const PreparedData& data) {
  const bool holdout_from_train = data.folds == 0 && config.data.validation_file.empty() &&
                                  config.data.validation_idx.images.empty();
  return IsSmallData(config.data, data.train.rows() + (holdout_from_train ? data.validation.rows() : 0));
}

MemberSpec BaseSpec(const Config& config, const PreparedData& data, int member) {
  MemberSpec spec;
  spec.index = member;
  spec.seed = Derive(config.run.seed, static_cast<uint64_t>(member));
  spec.model = config.model;
  spec.train = config.train;
  spec.basin = config.ensemble.basin;
  EarlyStoppingConfig& early = spec.train.early_stopping;
  if (early.mode == Switch::kAuto) early.mode = RunDataIsSmall(config, data) ? Switch::kOn : Switch::kOff;
  return spec;
}

std::vector<GridPoint> SearchGrid(const Config& config) {
  if (config.search.empty()) return {};
  const SearchConfig& s = config.search;
  std::vector<GridPoint> grid;
  for (const std::vector<int>& hidden : WithConfigured(s.hidden, config.model.hidden)) {
    for (double lr : WithConfigured(s.lr, config.train.optimizer.lr)) {
      for (double wd : WithConfigured(s.weight_decay, config.train.optimizer.weight_decay)) {
        for (double beta : WithConfigured(s.beta_nll, config.train.beta_nll)) {
          grid.push_back({hidden, lr, wd, beta});
        }
      }
    }
  }
  return grid;
}

Config WithPoint(Config config, const GridPoint& point) {
  config.model.hidden = point.hidden;
  config.train.optimizer.lr = point.lr;
  config.train.optimizer.weight_decay = point.weight_decay;
  config.train.beta_nll = point.beta_nll;
  return config;
}

std::vector<MemberSpec> SearchSpecs(const Config& config, const PreparedData& data) {
  std::vector<MemberSpec> specs;
  const std::vector<GridPoint> grid = SearchGrid(config);
  for (size_t p = 0; p < grid.size(); ++p) {
    for (int fold : FoldsOf(data)) {
      MemberSpec spec = BaseSpec(WithPoint(config, grid[p]), data, 0);
      spec.role = JobRole::kSearch;
      spec.point = static_cast<int>(p);
      spec.basin.method = BasinMethod::kNone;  // a point is scored by its trained network
      spec.fold = fold;
      spec.folds = data.folds;
      spec.fold_seed = fold >= 0 ? FoldSeed(config) : 0;
      specs.push_back(spec);
    }
  }
  return specs;
}

JointEpoch BestJointEpoch(const std::vector<const MemberResult*>& jobs) {
  size_t epochs = SIZE_MAX;
  for (const MemberResult* r : jobs) epochs = std::min(epochs, r->validation_nll.size());
  JointEpoch best{0, std::numeric_limits<double>::infinity()};
  for (size_t e = 0; e < epochs; ++e) {
    double sum = 0.0;
    int64_t rows = 0;
    for (const MemberResult* r : jobs) {
      sum += r->validation_nll[e] * static_cast<double>(r->validation_outputs.rows());
      rows += r->validation_outputs.rows();
    }
    const double nll = sum / static_cast<double>(rows);
    if (nll < best.validation_nll) best = {static_cast<int>(e) + 1, nll};
  }
  return best;
}

StatusOr<SearchOutcome> ScoreSearch(const Config& config, const std::vector<const MemberResult*>& results,
                                    const std::vector<std::string>& causes) {
  const std::vector<GridPoint> grid = SearchGrid(config);
  const size_t per_point = grid.empty() ? 0 : results.size() / grid.size();
  SearchOutcome out;
  std::string all_causes;
  for (size_t p = 0; p < grid.size(); ++p) {
    PointScore score{grid[p], std::numeric_limits<double>::infinity(), 0, ""};
    std::vector<const MemberResult*> jobs;
    for (size_t j = p * per_point; j < (p + 1) * per_point && score.failure.empty(); ++j) {
      if (results[j] == nullptr) score.failure = causes[j];
      else if (results[j]->validation_nll.empty()) score.failure = "no validation rows";
      else jobs.push_back(results[j]);
    }
    if (score.failure.empty()) {
      const JointEpoch joint = BestJointEpoch(jobs);
      score.validation_nll = joint.validation_nll;
      score.best_epoch = joint.epoch;
      if (out.best < 0 || score.validation_nll < out.points[out.best].validation_nll) out.best = static_cast<int>(p);
    } else {
      all_causes += (all_causes.empty() ? "" : "; ") + ("point " + std::to_string(p) + ": " + score.failure);
    }
    out.points.push_back(score);
  }
  if (out.best < 0) return Status::InvalidInput("search: every grid point failed: " + all_causes);
  return out;
}

std::vector<MemberSpec> FoldSpecs(const Config& config, const PreparedData& data) {
  std::vector<MemberSpec> specs;
  for (int i = 0; i < config.ensemble.members; ++i) {
    for (int k = 0; k < data.folds; ++k) {
      MemberSpec spec = BaseSpec(config, data, i);
      spec.role = JobRole::kFold;
      spec.fold = k;
      spec.folds = data.folds;
      spec.fold_seed = FoldSeed(config);
      specs.push_back(spec);
    }
  }
  return specs;
}

std::vector<MemberSpec> FoldSpecsAt(const Config& config, const PreparedData& data,
                                    const std::vector<int>& stop_epochs) {
  std::vector<MemberSpec> specs;
  for (MemberSpec spec : FoldSpecs(config, data)) {
    const int stop = stop_epochs[static_cast<size_t>(spec.index)];
    if (stop <= 0) continue;
    spec.stop_epoch = stop;
    spec.train.early_stopping.mode = Switch::kOff;
    specs.push_back(spec);
  }
  return specs;
}

std::vector<MemberSpec> MemberSpecs(const Config& config, const PreparedData& data,
                                    const std::vector<int>& stop_epochs) {
  std::vector<MemberSpec> specs;
  for (int i = 0; i < config.ensemble.members; ++i) {
    MemberSpec spec = BaseSpec(config, data, i);
    if (!stop_epochs.empty()) spec.stop_epoch = stop_epochs[static_cast<size_t>(i)];
    specs.push_back(spec);
  }
  return specs;
}

}  // namespace chorus

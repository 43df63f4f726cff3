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

template <typename T>
std::vector<T> OrConfigured(const std::vector<T>& values, const T& configured) {
  return values.empty() ? std::vector<T>{configured} : values;
}

int MedianLower(std::vector<int> v) {
  std::sort(v.begin(), v.end());
  return v[(v.size() - 1) / 2];
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
  for (const std::vector<int>& hidden : OrConfigured(s.hidden, config.model.hidden)) {
    for (double lr : OrConfigured(s.lr, config.train.optimizer.lr)) {
      for (double wd : OrConfigured(s.weight_decay, config.train.optimizer.weight_decay)) {
        for (double beta : OrConfigured(s.beta_nll, config.train.beta_nll)) {
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

StatusOr<SearchOutcome> ScoreSearch(const Config& config, const std::vector<const MemberResult*>& results,
                                    const std::vector<std::string>& causes) {
  const std::vector<GridPoint> grid = SearchGrid(config);
  const size_t per_point = grid.empty() ? 0 : results.size() / grid.size();
  SearchOutcome out;
  std::string all_causes;
  for (size_t p = 0; p < grid.size(); ++p) {
    PointScore score{grid[p], 0.0, 0, ""};
    double nll_sum = 0.0;
    int64_t rows = 0;
    std::vector<int> epochs;
    for (size_t j = p * per_point; j < (p + 1) * per_point; ++j) {
      const MemberResult* r = results[j];
      if (r == nullptr || r->validation_nll.empty()) {
        score.failure = r == nullptr ? causes[j] : "no validation rows";
        break;
      }
      const int64_t n = r->validation_outputs.rows();
      nll_sum += r->validation_nll[static_cast<size_t>(r->best_epoch) - 1] * static_cast<double>(n);
      rows += n;
      epochs.push_back(r->best_epoch);
    }
    if (score.failure.empty()) {
      score.validation_nll = nll_sum / static_cast<double>(rows);
      score.best_epoch = MedianLower(epochs);
      if (out.best < 0 || score.validation_nll < out.points[out.best].validation_nll) out.best = static_cast<int>(p);
    } else {
      score.validation_nll = std::numeric_limits<double>::infinity();
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

int StopEpochFromFolds(const std::vector<const MemberResult*>& folds, bool early_stopping) {
  if (!early_stopping || folds.empty()) return 0;
  std::vector<int> epochs;
  for (const MemberResult* f : folds) epochs.push_back(f->best_epoch);
  return MedianLower(epochs);
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

#include "common/folds.h"

#include <algorithm>
#include <cassert>
#include <numeric>

#include "common/rng.h"

namespace chorus {

bool IsSmallData(const DataConfig& config, int64_t train_rows) {
  return train_rows < config.small_data_rows;
}

int ResolvedFolds(const DataConfig& config, int64_t train_rows) {
  const bool from_file = config.format == "csv" ? !config.validation_file.empty()
                                                : !config.validation_idx.images.empty();
  if (from_file) return 0;
  if (config.folds >= 0) return config.folds;
  if (!IsSmallData(config, train_rows) || train_rows < 2) return 0;
  return static_cast<int>(std::min<int64_t>(kAutoFolds, train_rows));
}

std::vector<int> AssignFolds(const Split& train, int folds, uint64_t seed) {
  const int64_t n = train.rows();
  assert(folds >= 2 && folds <= n);
  std::vector<int64_t> order(static_cast<size_t>(n));
  std::iota(order.begin(), order.end(), int64_t{0});
  Philox rng(seed);
  for (int64_t i = n - 1; i > 0; --i) {
    std::swap(order[i], order[rng.NextBelow(static_cast<uint64_t>(i) + 1)]);
  }
  if (!train.labels.empty()) {
    std::stable_sort(order.begin(), order.end(),
                     [&](int64_t a, int64_t b) { return train.labels[a] < train.labels[b]; });
  } else if (!train.targets.empty()) {
    std::stable_sort(order.begin(), order.end(),
                     [&](int64_t a, int64_t b) { return train.targets[a] < train.targets[b]; });
  }
  std::vector<int> fold(static_cast<size_t>(n));
  for (int64_t r = 0; r < n; ++r) fold[order[r]] = static_cast<int>(r % folds);
  return fold;
}

FoldRows RowsOfFold(const std::vector<int>& fold_of_row, int fold) {
  FoldRows rows;
  for (size_t i = 0; i < fold_of_row.size(); ++i) {
    (fold_of_row[i] == fold ? rows.held_out : rows.train).push_back(static_cast<int64_t>(i));
  }
  return rows;
}

Split SelectRows(const Split& split, const std::vector<int64_t>& rows) {
  Split out;
  out.x.resize(static_cast<Eigen::Index>(rows.size()), split.x.cols());
  for (size_t r = 0; r < rows.size(); ++r) {
    out.x.row(static_cast<Eigen::Index>(r)) = split.x.row(rows[r]);
    if (!split.labels.empty()) out.labels.push_back(split.labels[rows[r]]);
    if (!split.targets.empty()) out.targets.push_back(split.targets[rows[r]]);
    if (!split.origin.empty()) out.origin.push_back(split.origin[rows[r]]);
  }
  return out;
}

void AdoptOutOfFoldOutputs(const std::vector<int>& fold_of_row,
                           const std::vector<const MemberResult*>& folds, MemberResult& member) {
  std::vector<const Matrix*> point;
  for (const MemberResult* f : folds) point.push_back(&f->validation_outputs);
  member.validation_outputs = ScatterByFold(fold_of_row, point);
  for (size_t s = 0; s < member.sample_validation_outputs.size(); ++s) {
    std::vector<const Matrix*> sample;
    for (const MemberResult* f : folds) sample.push_back(&f->sample_validation_outputs[s]);
    member.sample_validation_outputs[s] = ScatterByFold(fold_of_row, sample);
  }
}

PreparedData OutOfFoldView(const PreparedData& data) {
  PreparedData view = data;
  if (data.folds > 0) view.validation = data.train;
  return view;
}

}  // namespace chorus

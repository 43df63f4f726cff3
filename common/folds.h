// k-fold cross-fitting for small data: which training row belongs to which fold, and the rows a
// fold job trains and validates on. Every row is held out exactly once, so out-of-fold
// predictions cover the whole training split and no rows are lost to a single holdout.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/member_training.h"
#include "common/prepared_data.h"

namespace chorus {

// Folds the config asks for, given the training rows before any split: data.folds when >= 0,
// else (auto) kAutoFolds (at most one per row) when 2 <= rows < small_data_rows, else 0 (the
// single holdout). Always 0 when validation comes from a file.
constexpr int kAutoFolds = 5;
int ResolvedFolds(const DataConfig& config, int64_t train_rows);

// Whether `auto` settings treat data of `train_rows` rows (before any split) as small.
bool IsSmallData(const DataConfig& config, int64_t train_rows);

// fold[i] in [0, folds) for each of the split's rows. Stratified: the rows are shuffled with
// Philox(seed), stably sorted by label (classification) or target (regression), and dealt out
// round-robin, so every fold gets a near-equal share of each class or target range.
// Requires folds >= 2 and folds <= rows.
std::vector<int> AssignFolds(const Split& train, int folds, uint64_t seed);

// Rows of `train` that fold job `fold` trains on (fold[i] != fold) and holds out (== fold), each in
// ascending order.
struct FoldRows {
  std::vector<int64_t> train, held_out;
};
FoldRows RowsOfFold(const std::vector<int>& fold_of_row, int fold);

// The rows `rows` of `split`, in that order (a copy; origin included).
Split SelectRows(const Split& split, const std::vector<int64_t>& rows);

// Out-of-fold rows put back in training-row order: row i of the result is row r of
// per_fold[fold_of_row[i]], where i is the r-th row of its fold. per_fold[k] has as many rows as
// fold k, all the same columns. M: Matrix or MatrixD.
template <typename M>
M ScatterByFold(const std::vector<int>& fold_of_row, const std::vector<const M*>& per_fold) {
  M out(static_cast<Eigen::Index>(fold_of_row.size()), per_fold.empty() ? 0 : per_fold[0]->cols());
  std::vector<Eigen::Index> next(per_fold.size(), 0);
  for (size_t i = 0; i < fold_of_row.size(); ++i) {
    const int k = fold_of_row[i];
    out.row(static_cast<Eigen::Index>(i)) = per_fold[k]->row(next[k]++);
  }
  return out;
}

// Gives `member` (trained on all rows) its fold jobs' out-of-fold outputs as validation outputs,
// so assembly scores it on every training row: validation_outputs and each sample's (sample s
// from every fold job's sample s). folds[k] is the member's job without fold k; all have the
// member's sample count.
void AdoptOutOfFoldOutputs(const std::vector<int>& fold_of_row,
                           const std::vector<const MemberResult*>& folds, MemberResult& member);

// The data as assembly sees it when cross-fitting: validation is the whole training split (whose
// out-of-fold outputs the members carry). Without folds, the data itself.
PreparedData OutOfFoldView(const PreparedData& data);

}  // namespace chorus

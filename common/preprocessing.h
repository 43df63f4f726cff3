// Internal to data loading (common/dataset.cc and the loaders it calls): the one pipeline that
// turns raw rows, CSV or IDX alike, into PreparedData. Callers outside it use LoadPreparedData.
// Thread safety: reentrant free function.
#pragma once

#include <cstdint>

#include "common/config.h"
#include "common/prepared_data.h"
#include "common/raw_rows.h"
#include "common/status.h"

namespace chorus {

// Holds out validation from train (HoldOut, common/holdout.h) unless it came from a file or
// cross-fitting is on (ResolvedFolds > 0, which sets `folds`); fits the vocabularies, the class
// names (classification: sorted numerically if every label is an integer, else as text) or the
// target's mean and population standard deviation (regression), and the standardizer on the
// remaining train rows; applies them to every split and fills `hash` (common/data_hash.h).
// Errors (kInvalidInput): fewer train rows than folds or than the holdout needs, fewer than 2
// classes in train, a validation or test label never seen in train.
// Instantiated for double (CSV) and float (IDX).
template <typename Scalar>
StatusOr<PreparedData> Preprocess(const RawData<Scalar>& raw, const DataConfig& config,
                                  uint64_t run_seed);

}  // namespace chorus

// Loading, validating, splitting and preprocessing the data a run trains and evaluates on: the
// one entry point, LoadPreparedData. Thread safety: reentrant; the result is immutable once built.
#pragma once

#include <cstdint>

#include "common/config.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Loads the files named in `config`, validates them, splits off validation (a seeded fraction of
// train, shuffled with a generator derived from `run_seed`, or the given file; none when
// cross-fitting, ResolvedFolds > 0, which sets `folds`), fits the
// standardizer and vocabularies on the remaining train rows, and applies them to every split.
// Held-out validation: Fisher-Yates over the train row indices with
// Philox(Derive(run_seed, "validation")); the first max(1, round(fraction * n)) indices become
// validation. Both validation and the remaining train rows keep their original file order.
// max_train_rows / max_test_rows keep the first N rows of a file, before the split.
// CSV features are the train header's columns except the target, in header order; validation and
// test files are matched by column name (extra columns are ignored). IDX features are each row's
// elements flattened row-major, named x0, x1, ...
// Errors (kInvalidInput, message "FILE:LINE:COLUMN: ..." for CSV, "FILE[ROW]: ..." or
// "FILE: byte B: ..." for IDX): empty file, ragged row, non-numeric value in a numeric column,
// NaN/inf, empty class label, missing target or categorical column, fewer than 2 classes in
// train, a validation or test label never seen in train, IDX header/size mismatch, images/labels
// count mismatch, a bad format or validation fraction in `config`.
StatusOr<PreparedData> LoadPreparedData(const DataConfig& config, uint64_t run_seed);

}  // namespace chorus

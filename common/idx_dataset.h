// Internal to data loading: reads the IDX image/label file pairs a DataConfig names (format: idx)
// into PreparedData. Callers use LoadPreparedData (common/dataset.h), which checks the config
// first and documents the features (x0, x1, ...) and the errors.
// Thread safety: reentrant free function.
#pragma once

#include <cstdint>

#include "common/config.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Requires config.train_idx and config.test_idx to name both their files.
StatusOr<PreparedData> LoadIdxData(const DataConfig& config, uint64_t run_seed);

}  // namespace chorus

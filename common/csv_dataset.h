// Internal to data loading: reads the CSV files a DataConfig names (format: csv) into
// PreparedData. Callers use LoadPreparedData (common/dataset.h), which checks the config first
// and documents the features, the matching of columns by name and the errors.
// Thread safety: reentrant free function.
#pragma once

#include <cstdint>

#include "common/config.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// Requires config.train, config.test and config.target to be set.
StatusOr<PreparedData> LoadCsvData(const DataConfig& config, uint64_t run_seed);

}  // namespace chorus

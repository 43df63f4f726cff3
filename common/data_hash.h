// The fingerprint of prepared data (PreparedData::hash): runs, workers and bundles compare it to
// know they hold the same data. Thread safety: reentrant free function.
#pragma once

#include <string>

#include "common/prepared_data.h"

namespace chorus {

// SHA-256 (hex) of the task, feature and class names, vocabularies, standardizer, target
// statistics and every split's features, labels and targets, each fed with its length so that
// different data never share a byte stream. Rows' origins, `folds` and `hash` are left out.
std::string DataHash(const PreparedData& data);

}  // namespace chorus

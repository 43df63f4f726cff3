// The bundle of a finished run (common/bundle.h, proto/bundle_codec.h), made from what the run
// already holds: the config, the prepared data's preprocessing, the finished members and the
// assembly (weights, temperature). Thread safety: free functions, reentrant.
#pragma once

#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/config.h"
#include "common/ensemble_evaluation.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/status.h"
#include "common/training_summary.h"

namespace chorus {

// How the run turned raw inputs into features, as a bundle stores it.
Preprocessing RunPreprocessing(const DataConfig& config, const PreparedData& data);

// Requires: `members` are the members `ev` was assembled from, in the same order (ev.weights has
// one entry per member), trained on `data` with `config`; `summary` is
// SummarizeTraining(data, ...) (common/training_summary.h).
Bundle MakeRunBundle(const Config& config, const PreparedData& data,
                     const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                     const std::string& config_hash, const TrainingSummary& summary);

// MakeRunBundle, written atomically to `path` (WriteBundleFile). Errors: kIo naming the path.
Status WriteRunBundle(const std::string& path, const Config& config, const PreparedData& data,
                      const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                      const std::string& config_hash, const TrainingSummary& summary);

}  // namespace chorus

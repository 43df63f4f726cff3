// The report.json sections on how the members were trained (beside report/report_model.h's metrics):
// validation scheme, early stopping and each member's kept epoch and validation curve, the
// search grid with its scores and chosen point, the settings used and the basin scale.
// Thread safety: free functions.
#pragma once

#include <nlohmann/json.hpp>

#include "common/config.h"
#include "common/prepared_data.h"
#include "coordinator/run_stages.h"

namespace chorus {

// Adds "validation", "early_stopping", "settings", "search" (with a grid), "basin_scale" (with
// basin fits) and, per entry of report["members"], "best_epoch", "epochs_trained",
// "validation_nll" (the per-epoch curve; out-of-fold runs: each fold job's) and "stop_epoch".
// `assembled`: the config the ensemble was assembled with (chosen point, tuned scale).
void AddTrainingFacts(const Config& assembled, const PreparedData& data, const TrainedRun& trained,
                      nlohmann::json& report);

}  // namespace chorus

// The parts of report.html about how the members were trained and whether they were worth it:
// the linear baseline's verdict, the validation scheme, early stopping with each member's kept
// epoch, and the search grid. Rendered from report.json's "baseline", "validation",
// "early_stopping", "settings", "search" and members[] keys (coordinator/training_facts.h);
// reports without them (older runs) render nothing for the missing parts.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace chorus {

// A highlighted paragraph with report["baseline"]["verdict"]; "" without a baseline.
std::string BaselineVerdictHtml(const nlohmann::json& report);

// The "Training" section: validation scheme, early stopping, the settings used, the members'
// kept epochs and, with a search, the grid with each point's validation NLL (the chosen point
// highlighted). "" when the report has none of these keys.
std::string TrainingSectionHtml(const nlohmann::json& report);

}  // namespace chorus

// history.html: a registry's gate decisions and rollbacks over time, for people, as one
// self-contained page (inline CSS and SVG, no scripts, nothing loaded from the network).
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace chorus {

// The page for `history`, a pure function of it:
//   {"registry": DIR, "current": ID or null, "task": "classification" | "regression",
//    "decisions": [decision.json objects as chorus promote writes them, oldest first],
//    "rollbacks": [{"time", "from", "to"}, oldest first]}
// Requires decisions that passed CheckDecision; throws nlohmann::json::exception otherwise.
std::string HistoryHtml(const nlohmann::json& history);

// Empty if `decision` has what the page reads (verdict, time, version, task, reasons, guard
// rows and data hash, the candidate's run name and metrics, and the current bundle's metrics
// when there was one), else what is missing or malformed.
std::string CheckDecision(const nlohmann::json& decision);

}  // namespace chorus

// report.html: a run's report.json rendered for people as one self-contained page: inline CSS and
// inline SVG charts (report/report_charts.h), no scripts, fonts or anything from the network
// (a Content-Security-Policy forbids loading any), readable offline and printable.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace chorus {

// The page for `report`, a pure function of it: the same report.json gives the same bytes.
// Renders the facts report["manifest"] holds (workers seen, timings) when present.
// Requires a report that passed ValidateReport (report/report_model.h); throws
// nlohmann::json::exception if an optional part of it is malformed.
std::string ReportHtml(const nlohmann::json& report);

}  // namespace chorus

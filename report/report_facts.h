// The "Run facts" section of report.html: what the figures were measured on and how the run went
// (hashes, data sizes, members planned and failed with their causes, timings, and, from the
// manifest stored in report.json, version and workers seen). Thread safety: free functions.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace chorus {

// The section as HTML. Requires a report that passed ValidateReport (report/report_model.h);
// report["manifest"] and report["data"] are optional.
std::string FactsSection(const nlohmann::json& report);

}  // namespace chorus

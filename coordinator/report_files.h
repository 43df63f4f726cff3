// Writing a run's report files: report.json (report/report_model.h) and report.html, its
// rendering (report/report_html.h), side by side in the run directory.
// Thread safety: free functions; one writer per run directory.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

#include "common/status.h"

namespace chorus {

// Stores RUN_DIR/manifest.json, if it exists and parses, under report["manifest"] (workers seen,
// timings, version), and likewise RUN_DIR/hmc_reference.json (`chorus reference`) under
// report["hmc_reference"]; then writes RUN_DIR/report.json and RUN_DIR/report.html =
// ReportHtml(report), each atomically. Returns the first write error; a bad manifest or reference
// file is skipped, not an error.
Status WriteReportFiles(const std::string& run_dir, nlohmann::json report);

}  // namespace chorus

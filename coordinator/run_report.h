// report.json of a run, and writing it with its report.html: the stable core of DESIGN.md
// ("report.json keeps a stable core") plus what a reader and the charts need (mean and best
// member, data sizes, reliability bins, uncertainty histograms, cautions, the run's manifest).
// Thread safety: free functions.
#pragma once

#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/baseline_evaluation.h"
#include "common/dataset.h"
#include "common/evaluation.h"
#include "common/status.h"
#include "coordinator/report_html.h"

namespace chorus {

// Facts about the run that are not metrics.
struct RunFacts {
  std::string name;
  std::string data_hash;
  std::string config_hash;
  int members_planned = 0;
  std::vector<std::string> failed_members;  // "member 3: diverged: ..." for each failure
  double wall_seconds = 0;
};

// The text every report carries about what calibration on held-out data does and does not mean.
extern const char* const kCautionText;

// The report of an evaluated run. Requires ev to come from EvaluateEnsemble on `data`.
nlohmann::json ReportJson(const EnsembleEvaluation& ev, const PreparedData& data,
                          const RunFacts& facts);

// report["baseline"]: the linear baseline's model, test scores before and after its own
// temperature, its validation NLL beside the ensemble's (each at its tuned temperature),
// `better_on_validation`, the verdict sentence and the fitted hyperparameters; or `skipped`.
nlohmann::json BaselineJson(const EnsembleEvaluation& ev, const BaselineEvaluation& baseline);

// Checks that `report` has the keys and types ReportHtml and the compare command rely on
// (name, task, ensemble.test, members, weights, temperature, size_curve, hashes, uncertainty).
// Returns InvalidInput naming the first missing or mistyped field, prefixed with `source`.
Status ValidateReport(const nlohmann::json& report, const std::string& source);

// Reads and validates RUN_DIR/report.json. A missing, unreadable or invalid file is InvalidInput
// (exit code 2) naming the path: only complete runs have a report.
StatusOr<nlohmann::json> ReadRunReport(const std::string& run_dir);

// Stores RUN_DIR/manifest.json, if it exists and parses, under report["manifest"] (workers seen,
// timings, version); then writes RUN_DIR/report.json and RUN_DIR/report.html = ReportHtml(report),
// each atomically. Returns the first write error; a bad manifest is skipped, not an error.
Status WriteReportFiles(const std::string& run_dir, nlohmann::json report);

}  // namespace chorus

// What report.json holds: the run's scores and facts as JSON (the stable core that the compare
// command, report.html and other tools read), the sentences the report and the terminal share,
// and validating a report read back. Knows nothing of how a report is rendered.
// Thread safety: free functions.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/baseline_evaluation.h"
#include "common/ensemble_evaluation.h"
#include "common/shift_detection.h"
#include "common/prepared_data.h"
#include "common/status.h"

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

// The largest report.json (or manifest.json) read back.
constexpr int64_t kMaxReportBytes = int64_t{256} << 20;

// The text every report carries about what calibration on held-out data does and does not mean.
extern const char* const kCautionText;

// The report of an evaluated run. Requires ev to come from EvaluateEnsemble on `data`.
nlohmann::json ReportJson(const EnsembleEvaluation& ev, const PreparedData& data,
                          const RunFacts& facts);

// report["baseline"]: the linear baseline's model, test scores before and after its own
// temperature, its validation NLL beside the ensemble's (each at its tuned temperature),
// `better_on_validation`, the verdict sentence and the fitted hyperparameters; or `skipped`.
nlohmann::json BaselineJson(const EnsembleEvaluation& ev, const BaselineEvaluation& baseline);

// report["shift"]: per predictive, the AUROC of each uncertainty score for telling the shifted
// rows from the test rows (NaN scores, which do not apply, are left out) and the mean scores.
nlohmann::json ShiftJson(const ShiftEvaluation& shift);

// The warning the closing table and report.json carry when the tuned temperature (or scale)
// ended at an end of its search range (common/assembly.h AtTuningRangeEnd).
std::string TemperatureAtRangeEndWarning();

// One sentence: whether the linear baseline or the ensemble has the lower validation NLL (each at
// its own tuned temperature), or why no baseline was fitted.
std::string BaselineVerdict(const EnsembleEvaluation& ev, const BaselineEvaluation& baseline);

// Checks that `report` has the keys and types ReportHtml and the compare command rely on
// (name, task, ensemble.test, members, weights, temperature, size_curve, hashes, uncertainty).
// Returns InvalidInput naming the first missing or mistyped field, prefixed with `source`.
Status ValidateReport(const nlohmann::json& report, const std::string& source);

// Whether a report.json is of a classification run (else regression).
inline bool IsClassificationReport(const nlohmann::json& report) {
  return report["task"] == "classification";
}

// Reads and validates RUN_DIR/report.json. A missing, unreadable or invalid file is InvalidInput
// (exit code 2) naming the path: only complete runs have a report.
StatusOr<nlohmann::json> ReadRunReport(const std::string& run_dir);

}  // namespace chorus

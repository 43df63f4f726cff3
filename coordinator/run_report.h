// report.json and report.html of a run: the stable core of DESIGN.md ("report.json keeps a stable
// core") plus the extra facts a reader needs (mean and best member, data sizes, cautions).
// Thread safety: free functions.
#pragma once

#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/dataset.h"
#include "common/evaluation.h"

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

nlohmann::json ReportJson(const EnsembleEvaluation& ev, const PreparedData& data, const RunFacts& facts);

// A self-contained HTML page (no scripts, no network) rendering the same facts as tables.
std::string ReportHtml(const nlohmann::json& report);

}  // namespace chorus

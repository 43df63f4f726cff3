// Two runs side by side: the values of their report.json files that a person deciding between
// them looks at first (ensemble test metrics before and after temperature, the temperature,
// member counts, a summary of the weights; then, to tell posterior methods apart, samples per
// member, CPU-seconds, the members' mean KL, the shifted rows' AUROC and the basin method) with
// deltas, and whether both were measured on the same data and config. Thread safety: free
// functions.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace chorus {

// One numeric value of both runs.
struct ComparedValue {
  std::string key;             // machine name, e.g. "ensemble.test.nll"
  std::string label;           // for people, e.g. "ensemble test NLL (tuned T)"
  std::optional<double> a, b;  // absent where a report lacks the value
  int decimals = 4;            // how the table prints it
  // "a" or "b" for the better run on this value, "equal", or "" where the value has no better
  // direction (temperature, counts) or one side is missing. Accuracy: higher is better; NLL,
  // Brier, ECE, RMSE: lower; coverage_90: closer to 0.9.
  std::string better;
};

// One text value of both runs (task, weighting, hashes).
struct ComparedText {
  std::string key, label, a, b;
  bool equal() const { return a == b; }
};

struct RunComparison {
  std::string run_a, run_b;  // the run directories as given
  std::vector<ComparedValue> values;
  std::vector<ComparedText> texts;
  bool same_data() const;    // data hashes are equal
  bool same_config() const;  // config hashes are equal
};

// Requires both reports to have passed ValidateReport (report/report_model.h). Metrics are
// those of either report's ensemble.test, in the order accuracy, nll, brier, ece, rmse,
// coverage_90.
RunComparison CompareReports(const nlohmann::json& a, const nlohmann::json& b,
                             const std::string& run_a, const std::string& run_b);

// A fixed-width terminal table: value, A, B, B - A, better; then the texts, hashes shortened to
// 12 characters with "equal" or "differ".
std::string ComparisonTable(const RunComparison& c);

// {"a", "b", "values": [{key, label, a, b, delta, better}], "texts": [{key, a, b, equal}],
//  "same_data", "same_config"}; a missing value or delta is null.
nlohmann::json ComparisonJson(const RunComparison& c);

}  // namespace chorus

// The promotion gate: whether a candidate bundle may replace the registry's current one, decided
// from both bundles' scores on the same guard data. Pure comparison, no files; the command that
// gathers the scores and acts on the verdict is `chorus promote` (coordinator/promote_cli.cc).
//
// Checks (delta = candidate - current):
//   classification: nll delta <= max_nll_increase, (current - candidate) accuracy
//                   <= max_accuracy_drop, ece delta <= max_ece_increase;
//   regression:     nll delta <= max_nll_increase,
//                   candidate rmse <= current rmse * (1 + max_rmse_increase).
// coverage_90 is reported, not limited. A check fails if the candidate's value is not finite and
// passes if only the current one's is not. With no current bundle the candidate passes with the
// reason "no current bundle".
// Thread safety: plain values and reentrant free functions.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/config.h"

namespace chorus {

// One bundle's scores on the guard data (common/metrics.h definitions; rates are fractions,
// nll is the mean in nats). Classification fills nll, accuracy, ece; regression nll, rmse,
// coverage_90 (target units for rmse).
struct GateMetrics {
  double nll = 0;
  double accuracy = 0;
  double ece = 0;
  double rmse = 0;
  double coverage_90 = 0;
};

// How much worse than the current bundle a candidate may be; every limit is >= 0. The defaults
// are meant for guard sets of a few thousand rows; scores on a few hundred rows vary more than
// this between retrainings of equal quality (README, "Registry and promotion gate"), so loosen
// them there, or tighten them for large guard sets. NLL, a proper scoring rule, is the main
// criterion; ECE alone would favour a useless near-uniform predictor.
struct GateLimits {
  double max_nll_increase = 0.01;   // nats
  double max_accuracy_drop = 0.01;  // fraction of guard rows (0.01 = one percentage point)
  double max_ece_increase = 0.02;   // fraction
  double max_rmse_increase = 0.02;  // relative: a fraction of the current bundle's rmse
  // Refuse a candidate whose run found its linear baseline better on validation (report.json
  // baseline.better_on_validation), or whose report has no such verdict.
  bool refuse_if_baseline_better = false;
  // Training-data shift against the current bundle's (coordinator/shift_gate.h): the most any
  // input column's, or the labels', population stability index may reach (0.25: "significant
  // shift" in common practice), and any numeric column's or the regression target's
  // Kolmogorov-Smirnov statistic (1, the statistic's maximum: no limit).
  double max_psi = 0.25;
  double max_ks = 1.0;
};

// One limit applied: passed when `worsening` <= `allowed` (finite values; see above otherwise).
struct GateCheck {
  std::string metric;  // "nll", "accuracy", "ece" or "rmse"
  double candidate = 0;
  double current = 0;
  double worsening = 0;  // how much worse the candidate is, in the metric's units (may be < 0)
  double allowed = 0;    // the limit in the same units
  bool passed = false;
};

struct GateDecision {
  bool promote = false;
  std::vector<GateCheck> checks;     // empty when there is no current bundle
  std::vector<std::string> reasons;  // why: each failed check, or why it passed
};

// Applies `limits` to the candidate's scores against the current bundle's (nullopt: none).
GateDecision DecideGate(Task task, const GateMetrics& candidate,
                        const std::optional<GateMetrics>& current, const GateLimits& limits);

// {"nll": ..., "accuracy": ..., "ece": ...} or {"nll": ..., "rmse": ..., "coverage_90": ...}.
nlohmann::json GateMetricsJson(Task task, const GateMetrics& m);

// {"max_nll_increase": ..., ...}: the limits that apply to the task.
nlohmann::json GateLimitsJson(Task task, const GateLimits& limits);

// Candidate - current for each of the task's metrics (GateMetricsJson's keys).
nlohmann::json GateDeltaJson(Task task, const GateMetrics& candidate, const GateMetrics& current);

// [{"metric", "candidate", "current", "worsening", "allowed", "passed"}, ...].
nlohmann::json GateChecksJson(const std::vector<GateCheck>& checks);

}  // namespace chorus

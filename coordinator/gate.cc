#include "coordinator/gate.h"

#include <cmath>
#include <cstdio>

namespace chorus {
namespace {

std::string Number(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%.6g", value);
  return text;
}

// A candidate value that is not finite fails; a current value that is not finite (a broken
// current bundle) gives nothing to defend, so the check passes.
GateCheck Check(const std::string& metric, double candidate, double current, double worsening,
                double allowed) {
  const bool passed = std::isfinite(candidate) && (!std::isfinite(current) || worsening <= allowed);
  return GateCheck{metric, candidate, current, worsening, allowed, passed};
}

// "nll 0.912 -> 0.954: worse by 0.042, more than the 0.01 allowed (--max-nll-increase)".
std::string FailureReason(const GateCheck& c, const std::string& flag) {
  if (!std::isfinite(c.candidate)) return c.metric + " of the candidate is " + Number(c.candidate);
  return c.metric + " " + Number(c.current) + " -> " + Number(c.candidate) + ": worse by " +
         Number(c.worsening) + ", more than the " + Number(c.allowed) + " allowed (" + flag + ")";
}

const char* FlagOf(const std::string& metric) {
  if (metric == "nll") return "--max-nll-increase";
  if (metric == "accuracy") return "--max-accuracy-drop";
  if (metric == "ece") return "--max-ece-increase";
  return "--max-rmse-increase";
}

std::vector<GateCheck> Checks(Task task, const GateMetrics& a, const GateMetrics& b,
                              const GateLimits& limits) {
  std::vector<GateCheck> checks = {
      Check("nll", a.nll, b.nll, a.nll - b.nll, limits.max_nll_increase)};
  if (task == Task::kClassification) {
    checks.push_back(Check("accuracy", a.accuracy, b.accuracy, b.accuracy - a.accuracy,
                           limits.max_accuracy_drop));
    checks.push_back(Check("ece", a.ece, b.ece, a.ece - b.ece, limits.max_ece_increase));
  } else {
    checks.push_back(
        Check("rmse", a.rmse, b.rmse, a.rmse - b.rmse, b.rmse * limits.max_rmse_increase));
  }
  return checks;
}

}  // namespace

GateDecision DecideGate(Task task, const GateMetrics& candidate,
                        const std::optional<GateMetrics>& current, const GateLimits& limits) {
  GateDecision d;
  if (!current.has_value()) {
    d.promote = true;
    d.reasons.push_back("no current bundle");
    return d;
  }
  d.checks = Checks(task, candidate, *current, limits);
  for (const GateCheck& c : d.checks) {
    if (!c.passed) d.reasons.push_back(FailureReason(c, FlagOf(c.metric)));
  }
  d.promote = d.reasons.empty();
  if (d.promote) d.reasons.push_back("every metric within its limit of the current bundle");
  return d;
}

nlohmann::json GateMetricsJson(Task task, const GateMetrics& m) {
  if (task == Task::kClassification) {
    return {{"nll", m.nll}, {"accuracy", m.accuracy}, {"ece", m.ece}};
  }
  return {{"nll", m.nll}, {"rmse", m.rmse}, {"coverage_90", m.coverage_90}};
}

nlohmann::json GateLimitsJson(Task task, const GateLimits& limits) {
  nlohmann::json j = {{"max_nll_increase", limits.max_nll_increase}};
  if (task == Task::kClassification) {
    j["max_accuracy_drop"] = limits.max_accuracy_drop;
    j["max_ece_increase"] = limits.max_ece_increase;
  } else {
    j["max_rmse_increase"] = limits.max_rmse_increase;
  }
  j["refuse_if_baseline_better"] = limits.refuse_if_baseline_better;
  j["max_psi"] = limits.max_psi;
  j["max_ks"] = limits.max_ks;
  return j;
}

nlohmann::json GateDeltaJson(Task task, const GateMetrics& candidate, const GateMetrics& current) {
  const nlohmann::json a = GateMetricsJson(task, candidate), b = GateMetricsJson(task, current);
  nlohmann::json delta = nlohmann::json::object();
  for (const auto& [key, value] : a.items()) {
    delta[key] = value.get<double>() - b[key].get<double>();
  }
  return delta;
}

nlohmann::json GateChecksJson(const std::vector<GateCheck>& checks) {
  nlohmann::json j = nlohmann::json::array();
  for (const GateCheck& c : checks) {
    j.push_back({{"metric", c.metric},
                 {"candidate", c.candidate},
                 {"current", c.current},
                 {"worsening", c.worsening},
                 {"allowed", c.allowed},
                 {"passed", c.passed}});
  }
  return j;
}

}  // namespace chorus

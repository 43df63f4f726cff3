#include "coordinator/method_facts.h"

#include <map>
#include <optional>
#include <string>

#include "common/laplace_probit.h"
#include "common/log_format.h"
#include "common/metrics.h"
#include "report/compute_advice.h"

namespace chorus {

using nlohmann::json;

void AddCosts(const RunDirectory& dir, const std::vector<MemberResult>& members, double nll_tolerance,
              json& report) {
  const std::map<std::string, MemberResult::CpuSeconds> jobs = dir.JobCpuSeconds();
  double all_jobs = 0;
  for (const auto& [name, cpu] : jobs) all_jobs += cpu.training + cpu.basin_fit + cpu.samples;
  std::vector<MemberCpuSeconds> costs;
  for (const MemberResult& r : members) {
    const auto own = jobs.find(std::to_string(r.index));
    std::optional<MemberResult::CpuSeconds> cost;
    if (own != jobs.end()) cost = own->second;
    const std::string folds = "fold-" + std::to_string(r.index) + "-";
    for (auto it = jobs.lower_bound(folds); cost && it != jobs.end() && it->first.rfind(folds, 0) == 0; ++it) {
      cost->training += it->second.training + it->second.basin_fit + it->second.samples;
    }
    costs.push_back({r.index, cost});
  }
  const int samples = std::max<int>(1, static_cast<int>(members.front().sample_test_outputs.size()));
  AddComputeAdvice(costs, samples, all_jobs, nll_tolerance, report);
}

void AddProbitScores(const Config& assembled, const PreparedData& data,
                     const std::vector<MemberResult>& members, const std::vector<double>& weights,
                     json& report) {
  if (assembled.ensemble.basin.method != BasinMethod::kLaplaceLastLayer || data.task != Task::kClassification) return;
  std::vector<const BasinFit*> fits;
  for (const MemberResult& r : members) fits.push_back(&r.basin);
  const StatusOr<MatrixD> p = LaplaceProbitMixture(NetworkFor(assembled.model, data), fits, weights,
                                                   assembled.ensemble.basin.scale, data.test.x);
  if (!p.ok()) {
    LogPrintf(stderr, LogLevel::kWarning, "probit predictive not reported: %s", p.status().ToString().c_str());
    return;
  }
  const ClassificationMetrics m = ScoreClassification(p.value(), data.test.labels, assembled.report.ece_bins);
  report["ensemble"]["test_probit"] = {
      {"accuracy", m.accuracy}, {"nll", m.nll}, {"brier", m.brier}, {"ece", m.ece}, {"temperature", 1.0}};
}

}  // namespace chorus

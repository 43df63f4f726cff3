// What the ensemble cost and which size is worth it: each member's CPU-seconds in report.json,
// the size grid's points priced in CPU-seconds, and the cheapest point whose validation NLL is
// within a tolerance of the best point's, with the sentence the report and page show.
// Price of k members x s samples (of S per member): k * (mean training + basin-fit CPU-seconds
// per member) + k * (s / S) * (mean CPU-seconds of a member's S samples); means over the members
// whose cost is known. Thread safety: free functions.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/member_training.h"

namespace chorus {

struct MemberCpuSeconds {
  int index = 0;                                  // member index, as report["members"][i]["index"]
  std::optional<MemberResult::CpuSeconds> cost;   // null: not recorded (e.g. recovered after a crash)
};

// Adds "cpu_seconds" to each report["members"] entry whose cost is known, "cpu_seconds" to each
// report["size_curve"] point, and report["compute"]: {"cpu_seconds_all_jobs", "members_costed",
// "mean_per_member": {training, basin_fit, samples}, "nll_tolerance", "best", "advice" (the
// chosen point: members, samples, cpu_seconds, validation_nll, nll) and "text"}. Without any known
// cost, report["compute"] holds only "text", saying so. `samples_per_member`: S, >= 1.
// `all_jobs_cpu_seconds`: every finished job's cost, search and fold jobs included.
void AddComputeAdvice(const std::vector<MemberCpuSeconds>& members, int samples_per_member,
                      double all_jobs_cpu_seconds, double nll_tolerance, nlohmann::json& report);

}  // namespace chorus

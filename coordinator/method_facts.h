// The report.json sections that tell posterior methods apart beyond their test metrics: what the
// run cost (report/compute_advice.h, from the CPU-seconds the jobs' finished events carry) and,
// for last-layer Laplace classification runs, the ensemble scored with the probit approximation
// instead of samples (common/laplace_probit.h). Thread safety: free functions.
#pragma once

#include <vector>

#include <nlohmann/json.hpp>

#include "common/config.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "coordinator/run_directory.h"

namespace chorus {

// Adds members[].cpu_seconds, size_curve[].cpu_seconds and "compute" (AddComputeAdvice). A
// member's training includes its cross-fitting fold jobs (named "fold-<member>-<fold>...",
// JobName); a job whose finished event carries no cost (recovered after a crash) has none.
void AddCosts(const RunDirectory& dir, const std::vector<MemberResult>& members, double nll_tolerance,
              nlohmann::json& report);

// With basin.method laplace_last_layer on classification: ensemble.test_probit, the test scores of
// the members' probit predictives mixed with `weights` at T = 1 (beside ensemble.test_uncalibrated,
// the Monte Carlo mixture at T = 1). Nothing otherwise; a failure is logged, not fatal.
void AddProbitScores(const Config& assembled, const PreparedData& data,
                     const std::vector<MemberResult>& members, const std::vector<double>& weights,
                     nlohmann::json& report);

}  // namespace chorus

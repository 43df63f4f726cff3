// A report.json built in process from a hand-made EnsembleEvaluation (report/report_model.h),
// for tests of what reads reports (the HTML page, its charts, compare) without training anything.
// Thread safety: reentrant.
#pragma once

#include <nlohmann/json.hpp>

#include "common/config.h"

namespace chorus::testing {

// Three members with two samples each (weights 0.5, 0.3, 0.2), one failed member, a size grid
// over k = 1..3 members and s = 1, 2 samples, reliability bins (classification) or interval
// coverage (regression), an epistemic histogram and a selective-prediction curve. Hashes are 64
// hex digits; classification also has a Bayes-optimal NLL.
nlohmann::json SampleReport(Task task);

}  // namespace chorus::testing

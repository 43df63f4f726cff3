// The charts of report.html, each an HTML <figure> with a caption and an inline SVG chart
// (report/svg_chart.h), computed from report.json alone. Where a report.json lacks the data
// for a chart (a regression run has no reliability diagram; a report from an older chorus has no
// histograms) the function returns a short note instead of that chart.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace chorus {

// Consistent colours across the report's charts: the calibrated ensemble (tuned temperature) and
// correct predictions in blue, temperature 1 and wrong predictions in vermillion.
extern const char* const kCalibratedColour;
extern const char* const kUncalibratedColour;

// Test NLL, accuracy and ECE (regression: NLL, RMSE, 90% coverage) against the number of members,
// one line per samples-per-member value with a min-max band over random member subsets; and,
// when basin fits gave several samples per member, the same against samples per member.
// Requires a report that passed ValidateReport (report/report_model.h).
std::string SizeCurveFigures(const nlohmann::json& report);

// Classification: reliability diagram before and after temperature and the number of test
// predictions per confidence bin. Regression: observed against nominal coverage of central
// intervals before and after the standard-deviation scale.
std::string CalibrationFigures(const nlohmann::json& report);

// Histogram of the epistemic part for hits and misses, and the selective-prediction curve
// (accuracy, or for regression RMSE, on the most certain share of test inputs).
std::string UncertaintyFigures(const nlohmann::json& report);

}  // namespace chorus

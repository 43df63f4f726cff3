#include "tests/testing/sample_report.h"

#include <string>
#include <vector>

#include "common/ensemble_evaluation.h"
#include "common/prepared_data.h"
#include "common/reliability.h"
#include "report/report_model.h"

namespace chorus::testing {
namespace {

Scores SampleScores(double quality) {
  Scores s;
  s.classification = {0.6 + quality, 0.9 - quality, 0.5 - quality, 0.08 - quality / 10};
  s.regression = {17.0 - 10 * quality, 4.3 - quality, 0.88 + quality / 10};
  return s;
}

std::vector<SizeCurvePoint> SampleGrid() {
  std::vector<SizeCurvePoint> grid;
  for (int s : {1, 2}) {
    for (int k = 1; k <= 3; ++k) {
      const double q = 0.01 * k + 0.005 * s;
      SizeCurvePoint point;
      point.members = k;
      point.samples = s;
      point.nll = {0.9 - q, 0.88 - q, 0.92 - q};
      point.validation_nll = {0.91 - q, 0.89 - q, 0.93 - q};
      point.accuracy = {0.6 + q, 0.59 + q, 0.62 + q};
      point.ece = {0.07 - q, 0.06 - q, 0.08 - q};
      point.rmse = {17 - q, 16.5 - q, 17.5 - q};
      point.coverage_90 = {0.89 + q, 0.88 + q, 0.9 + q};
      grid.push_back(point);
    }
  }
  return grid;
}

void FillUncertainty(Task task, EnsembleEvaluation& ev) {
  UncertaintySummary& u = ev.uncertainty;
  u.total = 1.0, u.aleatoric = 0.95, u.epistemic = 0.05;
  u.auroc_total = 0.76, u.auroc_aleatoric = 0.75, u.auroc_epistemic = 0.62;
  for (int pct = 50; pct <= 100; pct += 5) {
    u.coverages.push_back(pct / 100.0);
    u.selective_accuracy.push_back(0.8 - pct / 1000.0);
    u.selective_rmse.push_back(12 + pct / 20.0);
  }
  std::vector<double> scores;
  std::vector<bool> hit;
  for (int i = 0; i < 40; ++i) scores.push_back(0.001 * (i % 17)), hit.push_back(i % 3 != 0);
  u.epistemic_histogram = HistogramByOutcome(scores, hit, 10);
  if (task == Task::kClassification) {
    MatrixD probs(6, 2);
    probs << 0.9, 0.1, 0.6, 0.4, 0.3, 0.7, 0.55, 0.45, 0.2, 0.8, 0.65, 0.35;
    const std::vector<int32_t> labels = {0, 1, 1, 0, 1, 0};
    ev.reliability = ReliabilityBins(probs, labels, 5);
    ev.reliability_uncalibrated = ReliabilityBins(probs.array().pow(1.2).matrix(), labels, 5);
  } else {
    ev.interval_coverage = {{0.25, 0.27}, {0.5, 0.52}, {0.9, 0.89}};
    ev.interval_coverage_uncalibrated = {{0.25, 0.3}, {0.5, 0.58}, {0.9, 0.94}};
  }
}

}  // namespace

nlohmann::json SampleReport(Task task) {
  EnsembleEvaluation ev;
  ev.task = task;
  ev.weights = {0.5, 0.3, 0.2};
  ev.temperature = 1.25;
  ev.test = SampleScores(0.03);
  ev.test_uncalibrated = SampleScores(0.02);
  ev.mean_member = SampleScores(0.0);
  for (int m = 0; m < 3; ++m) {
    ev.members.push_back({m, 1000u + static_cast<uint64_t>(m), 2, SampleScores(0.005 * m),
                          SampleScores(0.004 * m), 1.0 - 0.01 * m});
  }
  ev.best_member = 2;
  ev.size_curve = SampleGrid();
  FillUncertainty(task, ev);
  if (task == Task::kClassification) ev.bayes_optimal_test_nll = 0.7;
  PreparedData data;
  data.task = task;
  if (task == Task::kClassification) data.class_names = {"blockage", "cavitation"};
  const RunFacts facts{"sample-" + std::string(TaskName(task)),
                       std::string(64, 'a'),
                       std::string(64, 'c'),
                       4,
                       {"member 3: diverged: loss is NaN in epoch 2"},
                       1.5};
  return ReportJson(ev, data, facts);
}

}  // namespace chorus::testing

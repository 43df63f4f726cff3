#include "report/report_model.h"

#include <cmath>
#include <filesystem>
#include <iomanip>
#include <sstream>
#include <utility>

#include "common/assembly.h"
#include "common/file_util.h"

namespace chorus {

const char* const kCautionText =
    "These probabilities were calibrated on held-out data drawn like the training data. Under "
    "distribution shift (new sites, sensors, customers, seasons) they can be badly wrong. Validate "
    "on your own recent data before a model drives a decision that can harm someone, and follow "
    "your organisation's model-risk rules and local regulation.";

namespace {

using nlohmann::json;

json ScoresJson(Task task, const Scores& s) {
  if (task == Task::kClassification) {
    const ClassificationMetrics& c = s.classification;
    return {{"accuracy", c.accuracy}, {"nll", c.nll}, {"brier", c.brier}, {"ece", c.ece}};
  }
  const RegressionMetrics& r = s.regression;
  return {{"rmse", r.rmse}, {"nll", r.nll}, {"coverage_90", r.coverage_90}};
}

json SpreadJson(const Spread& s) { return {{"mean", s.mean}, {"min", s.min}, {"max", s.max}}; }

json SizeCurveJson(Task task, const std::vector<SizeCurvePoint>& curve) {
  json out = json::array();
  for (const SizeCurvePoint& p : curve) {
    json point = {{"members", p.members}, {"samples", p.samples}, {"nll", SpreadJson(p.nll)},
                  {"validation_nll", SpreadJson(p.validation_nll)}};
    if (task == Task::kClassification) {
      point["accuracy"] = SpreadJson(p.accuracy);
      point["ece"] = SpreadJson(p.ece);
    } else {
      point["rmse"] = SpreadJson(p.rmse);
      point["coverage_90"] = SpreadJson(p.coverage_90);
    }
    out.push_back(point);
  }
  return out;
}

json MembersJson(const EnsembleEvaluation& ev) {
  json members = json::array();
  for (const MemberScores& m : ev.members) {
    members.push_back({{"index", m.index},
                       {"seed", std::to_string(m.seed)},
                       {"samples", m.samples},
                       {"validation_nll", m.validation_nll},
                       {"test", ScoresJson(ev.task, m.test)},
                       {"test_trained_point", ScoresJson(ev.task, m.test_point)}});
  }
  return members;
}

json ReliabilityJson(const std::vector<ReliabilityBin>& bins) {
  json out = json::array();
  for (const ReliabilityBin& b : bins) {
    out.push_back({{"lower", b.lower},
                   {"upper", b.upper},
                   {"count", b.count},
                   {"confidence", b.confidence},
                   {"accuracy", b.accuracy}});
  }
  return out;
}

json IntervalCoverageJson(const std::vector<IntervalCoverage>& levels) {
  json out = json::array();
  for (const IntervalCoverage& c : levels) {
    out.push_back({{"nominal", c.nominal}, {"observed", c.observed}});
  }
  return out;
}

json HistogramJson(Task task, const OutcomeHistogram& h) {
  const bool classification = task == Task::kClassification;
  return {{"quantity", classification ? "mutual information (nats)"
                                      : "std of the members' means (target units)"},
          {"edges", h.edges},
          {"groups",
           {{{"name", classification ? "correct" : "inside 90% interval"}, {"counts", h.hits}},
            {{"name", classification ? "wrong" : "outside 90% interval"}, {"counts", h.misses}}}}};
}

// Pairs {"coverage": c, key: values[i]} for the selective-prediction curve.
json SelectiveJson(const std::vector<double>& coverages, const std::vector<double>& values,
                   const char* key) {
  json out = json::array();
  for (size_t i = 0; i < coverages.size(); ++i) {
    out.push_back({{"coverage", coverages[i]}, {key, values[i]}});
  }
  return out;
}

json UncertaintyJson(const EnsembleEvaluation& ev) {
  const UncertaintySummary& u = ev.uncertainty;
  const bool classification = ev.task == Task::kClassification;
  json out = {
      {"unit", classification ? "nats (entropy)" : "target units squared (variance)"},
      {"test_mean", {{"total", u.total}, {"aleatoric", u.aleatoric}, {"epistemic", u.epistemic}}},
      {"epistemic_histogram", HistogramJson(ev.task, u.epistemic_histogram)}};
  if (classification) {
    out["auroc_misclassified"] = {{"total", u.auroc_total},
                                  {"aleatoric", u.auroc_aleatoric},
                                  {"epistemic", u.auroc_epistemic}};
    out["selective_accuracy"] = SelectiveJson(u.coverages, u.selective_accuracy, "accuracy");
  } else {
    out["selective_rmse"] = SelectiveJson(u.coverages, u.selective_rmse, "rmse");
  }
  return out;
}

json DiversityMeasuresJson(Task task, const DiversityMeasures& d) {
  json out = {{"components", d.components}, {"pairs", d.pairs}, {"mean_kl", d.mean_kl}};
  if (task == Task::kClassification) out["disagreement"] = d.disagreement;
  return out;
}

json DiversityJson(const EnsembleEvaluation& ev) {
  json out = {{"unit", "nats (mean KL)"},
              {"between_members", DiversityMeasuresJson(ev.task, ev.diversity.between_members)}};
  if (ev.diversity.within_members) {
    out["within_members"] = DiversityMeasuresJson(ev.task, *ev.diversity.within_members);
  }
  return out;
}

// Adds the task's calibration diagram: reliability bins or interval coverage.
void AddCalibrationDiagram(const EnsembleEvaluation& ev, json& report) {
  if (ev.task == Task::kClassification) {
    report["reliability"] = {{"uncalibrated", ReliabilityJson(ev.reliability_uncalibrated)},
                             {"calibrated", ReliabilityJson(ev.reliability)}};
  } else {
    report["interval_coverage"] = {
        {"uncalibrated", IntervalCoverageJson(ev.interval_coverage_uncalibrated)},
        {"calibrated", IntervalCoverageJson(ev.interval_coverage)}};
  }
}

}  // namespace

json ShiftJson(const ShiftEvaluation& shift) {
  json predictives = json::array();
  for (const ShiftDetection& d : shift.predictives) {
    json auroc = json::object();
    const std::pair<const char*, double> scores[] = {{"entropy", d.aurocs.entropy},
                                                     {"mutual_information", d.aurocs.mutual_information},
                                                     {"max_probability", d.aurocs.max_probability},
                                                     {"total_std", d.aurocs.total_std},
                                                     {"epistemic_std", d.aurocs.epistemic_std}};
    for (const auto& [name, value] : scores) {
      if (!std::isnan(value)) auroc[name] = value;
    }
    predictives.push_back({{"predictive", d.predictive},
                           {"components", d.components},
                           {"temperature", d.temperature},
                           {"auroc", auroc},
                           {"mean_score_test", d.aurocs.mean_score_test},
                           {"mean_score_shifted", d.aurocs.mean_score_shifted}});
  }
  return {{"file", shift.file},
          {"rows", shift.rows},
          {"test_rows", shift.test_rows},
          {"positives", "shifted rows"},
          {"predictives", predictives}};
}

json ReportJson(const EnsembleEvaluation& ev, const PreparedData& data, const RunFacts& facts) {
  const MemberScores& best = ev.members[ev.best_member];
  json report = {
      {"name", facts.name},
      {"task", TaskName(ev.task)},
      {"ensemble",
       {{"test", ScoresJson(ev.task, ev.test)},
        {"test_uncalibrated", ScoresJson(ev.task, ev.test_uncalibrated)}}},
      {"mean_member", {{"test", ScoresJson(ev.task, ev.mean_member)}}},
      {"best_member",
       {{"index", best.index},
        {"chosen_by", "validation nll"},
        {"test", ScoresJson(ev.task, best.test)}}},
      {"members", MembersJson(ev)},
      {"temperature", ev.temperature},
      {"weighting", WeightingName(ev.weighting)},
      {"weights", ev.weights},
      {"validation_nll_weighted", ev.validation_nll_weighted},
      {"validation_nll_calibrated", ev.validation_nll_calibrated},
      {"uncertainty", UncertaintyJson(ev)},
      {"diversity", DiversityJson(ev)},
      {"size_curve", SizeCurveJson(ev.task, ev.size_curve)},
      {"data_hash", facts.data_hash},
      {"config_hash", facts.config_hash},
      {"data",
       {{"train_rows", data.train.rows()},
        {"validation_rows", data.validation.rows()},
        {"test_rows", data.test.rows()},
        {"features", data.features()},
        {"classes", data.class_names}}},
      {"members_planned", facts.members_planned},
      {"failed_members", facts.failed_members},
      {"wall_seconds", facts.wall_seconds},
      {"caution", kCautionText},
  };
  AddCalibrationDiagram(ev, report);
  if (ev.tuned_temperature && AtTuningRangeEnd(ev.temperature)) {
    report["temperature_warning"] = TemperatureAtRangeEndWarning();
  }
  if (ev.bayes_optimal_test_nll) report["bayes_optimal_test_nll"] = *ev.bayes_optimal_test_nll;
  if (ev.test_without_basin) {
    report["ensemble"]["test_without_basin"] = ScoresJson(ev.task, *ev.test_without_basin);
  }
  return report;
}

json BaselineJson(const EnsembleEvaluation& ev, const BaselineEvaluation& b) {
  json out = {{"model", b.model}, {"verdict", BaselineVerdict(ev, b)}};
  if (!b.skipped.empty()) {
    out["skipped"] = b.skipped;
    return out;
  }
  json hyper = json::object();
  for (const auto& [name, value] : b.hyperparameters) hyper[name] = value;
  out.update({{"test", ScoresJson(ev.task, b.test)},
              {"test_uncalibrated", ScoresJson(ev.task, b.test_uncalibrated)},
              {"temperature", b.temperature},
              {"validation_nll", b.validation_nll},
              {"ensemble_validation_nll", ev.validation_nll_calibrated},
              {"better_on_validation", b.validation_nll < ev.validation_nll_calibrated},
              {"hyperparameters", hyper}});
  return out;
}

namespace {

enum class Kind { kString, kNumber, kObject, kArray };

bool HasKind(const json& v, Kind kind) {
  switch (kind) {
    case Kind::kString: return v.is_string();
    case Kind::kNumber: return v.is_number();
    case Kind::kObject: return v.is_object();
    case Kind::kArray: return v.is_array();
  }
  return false;
}

const char* KindName(Kind kind) {
  switch (kind) {
    case Kind::kString: return "a string";
    case Kind::kNumber: return "a number";
    case Kind::kObject: return "an object";
    case Kind::kArray: return "an array";
  }
  return "";
}

// The fields ReportHtml and the compare command read without checking.
const std::pair<const char*, Kind> kRequiredFields[] = {
    {"/name", Kind::kString},
    {"/task", Kind::kString},
    {"/ensemble/test", Kind::kObject},
    {"/ensemble/test_uncalibrated", Kind::kObject},
    {"/mean_member/test", Kind::kObject},
    {"/best_member/test", Kind::kObject},
    {"/members", Kind::kArray},
    {"/weights", Kind::kArray},
    {"/weighting", Kind::kString},
    {"/temperature", Kind::kNumber},
    {"/size_curve", Kind::kArray},
    {"/uncertainty/test_mean", Kind::kObject},
    {"/data_hash", Kind::kString},
    {"/config_hash", Kind::kString},
    {"/members_planned", Kind::kNumber},
    {"/failed_members", Kind::kArray},
};

}  // namespace

Status ValidateReport(const json& report, const std::string& source) {
  for (const auto& [path, kind] : kRequiredFields) {
    const json::json_pointer pointer(path);
    if (!report.is_object() || !report.contains(pointer) || !HasKind(report[pointer], kind)) {
      return Status::InvalidInput(source + ": field " + std::string(path).substr(1) +
                                  " is missing or not " + KindName(kind));
    }
  }
  const std::string task = report["task"];
  if (task != "classification" && task != "regression") {
    return Status::InvalidInput(source + ": field task is neither classification nor regression");
  }
  if (report["members"].empty() || report["weights"].size() != report["members"].size()) {
    return Status::InvalidInput(source + ": members is empty or weights has another length");
  }
  for (const json& w : report["weights"]) {
    if (!w.is_number()) return Status::InvalidInput(source + ": weights holds a non-number");
  }
  return Status::Ok();
}

StatusOr<json> ReadRunReport(const std::string& run_dir) {
  const std::string path = run_dir + "/report.json";
  if (!std::filesystem::is_regular_file(path)) {
    return Status::InvalidInput(path + ": no such file (only a complete run has a report)");
  }
  StatusOr<std::string> text = ReadFileToString(path, kMaxReportBytes);
  if (!text.ok()) return Status::InvalidInput(text.status().ToString());
  json report = json::parse(text.value(), nullptr, /*allow_exceptions=*/false);
  if (report.is_discarded()) return Status::InvalidInput(path + ": not valid JSON");
  CHORUS_RETURN_IF_ERROR(ValidateReport(report, path));
  return report;
}

std::string TemperatureAtRangeEndWarning() {
  return "warning: the tuned temperature sits at the end of its range (0.05 to 20): the "
         "validation rows did not pin it down (for example, no confident mistake among them), so "
         "do not trust the calibration; use more validation rows or cross-fitting "
         "(data.validation.folds).";
}

std::string BaselineVerdict(const EnsembleEvaluation& ev, const BaselineEvaluation& baseline) {
  if (!baseline.skipped.empty()) return "linear baseline not fitted: " + baseline.skipped;
  std::ostringstream s;
  s << std::fixed << std::setprecision(4);
  if (baseline.validation_nll < ev.validation_nll_calibrated) {
    s << "The linear baseline beats the ensemble on validation (nll " << baseline.validation_nll
      << " vs " << ev.validation_nll_calibrated << "): on this data a linear model may serve as well "
      << "or better, at a fraction of the cost.";
  } else {
    s << "The ensemble beats the linear baseline on validation (nll " << ev.validation_nll_calibrated
      << " vs " << baseline.validation_nll << ").";
  }
  return s.str();
}

}  // namespace chorus

#include "coordinator/shift_gate.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>

#include "common/distribution_shift.h"
#include "report/html_text.h"

namespace chorus {
namespace shift_gate_detail {

constexpr size_t kNamedInReason = 5;  // columns named in one refusal reason

const std::vector<std::string>& VocabularyOf(const Bundle& b, const FeaturePlan::Column& c) {
  return b.preprocessing.plan.categorical[static_cast<size_t>(c.index)].vocabulary;
}

// The compared column, or why it cannot be compared (sets *unmatched).
ColumnShift CompareColumn(const Bundle& current, size_t k_current, const Bundle& candidate,
                          size_t k_candidate, std::string* unmatched) {
  const FeaturePlan::Column& a = current.preprocessing.plan.columns[k_current];
  const FeaturePlan::Column& b = candidate.preprocessing.plan.columns[k_candidate];
  const ColumnSummary& sa = current.training_summary.columns[k_current];
  const ColumnSummary& sb = candidate.training_summary.columns[k_candidate];
  ColumnShift shift{a.name, 0, std::numeric_limits<double>::quiet_NaN()};
  if (a.categorical != b.categorical) {
    *unmatched = a.name + " (kind differs)";
    return shift;
  }
  if (a.categorical) {
    shift.psi = CategoryPsi(VocabularyOf(current, a), sa.category_shares, VocabularyOf(candidate, b),
                            sb.category_shares);
  } else {
    shift.psi = SketchPsi(sa.numeric, sb.numeric);
    shift.ks = KolmogorovSmirnov(sa.numeric, sb.numeric);
  }
  return shift;
}

ColumnShift CompareLabels(const Bundle& current, const Bundle& candidate) {
  const TrainingSummary& a = current.training_summary;
  const TrainingSummary& b = candidate.training_summary;
  if (current.task == Task::kClassification) {
    return {"(labels)", CategoryPsi(current.class_names, a.class_shares, candidate.class_names,
                                    b.class_shares),
            std::numeric_limits<double>::quiet_NaN()};
  }
  return {"(target)", SketchPsi(a.target, b.target), KolmogorovSmirnov(a.target, b.target)};
}

// "data shift: PSI above 0.250 (--max-psi) in 2 of 7 columns: income 0.412, age 0.301".
std::string Refusal(const std::vector<ColumnShift>& over, size_t compared, const char* statistic,
                    double limit, const char* option, bool psi) {
  std::string text = std::string("data shift: ") + statistic + " above " +
                     FormatFixed(limit, 3) + " (" + option + ") in " +
                     std::to_string(over.size()) + " of " + std::to_string(compared) +
                     " columns: ";
  for (size_t i = 0; i < over.size() && i < kNamedInReason; ++i) {
    text += (i ? ", " : "") + over[i].column + " " + FormatFixed(psi ? over[i].psi : over[i].ks, 3);
  }
  if (over.size() > kNamedInReason) text += ", ...";
  return text;
}

void AddRefusals(const GateLimits& limits, ShiftComparison* s) {
  std::vector<ColumnShift> psi_over, ks_over;
  for (const ColumnShift& c : s->columns) {
    if (c.psi > limits.max_psi) psi_over.push_back(c);
    if (c.ks > limits.max_ks) ks_over.push_back(c);  // false for NaN
  }
  std::sort(ks_over.begin(), ks_over.end(),
            [](const ColumnShift& a, const ColumnShift& b) { return a.ks > b.ks; });
  if (!psi_over.empty()) {
    s->refusals.push_back(
        Refusal(psi_over, s->columns.size(), "PSI", limits.max_psi, "--max-psi", true));
  }
  if (!ks_over.empty()) {
    s->refusals.push_back(
        Refusal(ks_over, s->columns.size(), "KS", limits.max_ks, "--max-ks", false));
  }
  const ColumnShift& l = s->labels;
  if (l.psi > limits.max_psi) {
    s->refusals.push_back("data shift: " + l.column + " PSI " + FormatFixed(l.psi, 3) + " above " +
                          FormatFixed(limits.max_psi, 3) + " (--max-psi)");
  }
  if (l.ks > limits.max_ks) {
    s->refusals.push_back("data shift: " + l.column + " KS " + FormatFixed(l.ks, 3) + " above " +
                          FormatFixed(limits.max_ks, 3) + " (--max-ks)");
  }
}

nlohmann::json ColumnShiftJson(const ColumnShift& c) {
  return {{"column", c.column},
          {"psi", c.psi},
          {"ks", std::isnan(c.ks) ? nlohmann::json(nullptr) : nlohmann::json(c.ks)}};
}

}  // namespace shift_gate_detail

ShiftComparison CompareTrainingData(const Bundle& current, const Bundle& candidate,
                                    const GateLimits& limits) {
  ShiftComparison s;
  if (current.training_summary.empty()) {
    s.skipped = "the current bundle has no training summary (written by an older chorus)";
    return s;
  }
  if (candidate.training_summary.empty()) {
    s.skipped = "the candidate bundle has no training summary";
    return s;
  }
  if (current.task != candidate.task) {
    s.skipped = "the bundles' tasks differ";
    return s;
  }
  const std::vector<FeaturePlan::Column>& a = current.preprocessing.plan.columns;
  const std::vector<FeaturePlan::Column>& b = candidate.preprocessing.plan.columns;
  std::map<std::string, size_t> in_candidate;
  for (size_t k = 0; k < b.size(); ++k) in_candidate[b[k].name] = k;
  for (size_t k = 0; k < a.size(); ++k) {
    const auto found = in_candidate.find(a[k].name);
    if (found == in_candidate.end()) {
      s.unmatched.push_back(a[k].name + " (current only)");
      continue;
    }
    std::string unmatched;
    const ColumnShift shift =
        shift_gate_detail::CompareColumn(current, k, candidate, found->second, &unmatched);
    if (unmatched.empty()) {
      s.columns.push_back(shift);
    } else {
      s.unmatched.push_back(unmatched);
    }
    in_candidate.erase(found);
  }
  for (const FeaturePlan::Column& c : b) {
    if (in_candidate.count(c.name) != 0) s.unmatched.push_back(c.name + " (candidate only)");
  }
  std::stable_sort(s.columns.begin(), s.columns.end(),
                   [](const ColumnShift& x, const ColumnShift& y) { return x.psi > y.psi; });
  s.labels = shift_gate_detail::CompareLabels(current, candidate);
  shift_gate_detail::AddRefusals(limits, &s);
  return s;
}

nlohmann::json ShiftComparisonJson(const ShiftComparison& s, const Bundle& current,
                                   const Bundle& candidate, size_t shown) {
  nlohmann::json j = {{"skipped", s.skipped.empty() ? nlohmann::json(nullptr)
                                                    : nlohmann::json(s.skipped)}};
  if (!s.skipped.empty()) return j;
  j["rows"] = {{"current", current.training_summary.rows},
               {"candidate", candidate.training_summary.rows}};
  j["labels"] = shift_gate_detail::ColumnShiftJson(s.labels);
  j["columns_compared"] = s.columns.size();
  nlohmann::json most = nlohmann::json::array();
  for (size_t i = 0; i < s.columns.size() && i < shown; ++i) {
    most.push_back(shift_gate_detail::ColumnShiftJson(s.columns[i]));
  }
  j["most_shifted"] = most;
  j["unmatched"] = s.unmatched;
  j["refusals"] = s.refusals;
  return j;
}

}  // namespace chorus

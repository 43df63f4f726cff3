#include "coordinator/run_comparison.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <utility>

#include "report/html_text.h"

namespace chorus {
namespace {

using nlohmann::json;

constexpr double kEqualTolerance = 1e-12;
constexpr size_t kShortHash = 12;

enum class Direction { kNone, kHigher, kLower, kNearNinety };

struct MetricInfo {
  const char* key;
  const char* label;
  Direction direction;
};

constexpr MetricInfo kMetrics[] = {
    {"accuracy", "accuracy", Direction::kHigher},
    {"nll", "NLL", Direction::kLower},
    {"brier", "Brier", Direction::kLower},
    {"ece", "ECE", Direction::kLower},
    {"rmse", "RMSE", Direction::kLower},
    {"coverage_90", "90% coverage", Direction::kNearNinety},
};

std::optional<double> NumberAt(const json& report, const std::string& pointer) {
  const json::json_pointer p(pointer);
  if (!report.contains(p) || !report[p].is_number()) return std::nullopt;
  return report[p].get<double>();
}

std::string Better(const ComparedValue& v, Direction direction) {
  if (direction == Direction::kNone || !v.a || !v.b) return "";
  double a = *v.a, b = *v.b;
  if (direction == Direction::kNearNinety) a = -std::abs(a - 0.9), b = -std::abs(b - 0.9);
  if (direction == Direction::kLower) a = -a, b = -b;
  if (std::abs(a - b) <= kEqualTolerance * std::max(1.0, std::abs(a))) return "equal";
  return a > b ? "a" : "b";
}

ComparedValue Value(std::string key, std::string label, std::optional<double> a,
                    std::optional<double> b, int decimals, Direction direction) {
  ComparedValue v{std::move(key), std::move(label), a, b, decimals, ""};
  v.better = Better(v, direction);
  return v;
}

// min, max and effective number 1 / sum w^2 of a report's weights.
std::vector<double> WeightSummary(const json& report) {
  double lo = 1, hi = 0, squares = 0;
  for (const json& w : report["weights"]) {
    const double x = w.get<double>();
    lo = std::min(lo, x), hi = std::max(hi, x), squares += x * x;
  }
  return {lo, hi, squares > 0 ? 1 / squares : 0.0};
}

void AddEnsembleMetrics(const json& a, const json& b, RunComparison& c) {
  const std::pair<const char*, const char*> sets[] = {{"test", "tuned T"},
                                                      {"test_uncalibrated", "T = 1"}};
  for (const auto& [set, setting] : sets) {
    for (const MetricInfo& m : kMetrics) {
      const std::string pointer = std::string("/ensemble/") + set + "/" + m.key;
      const std::optional<double> va = NumberAt(a, pointer), vb = NumberAt(b, pointer);
      if (!va && !vb) continue;
      c.values.push_back(Value(std::string("ensemble.") + set + "." + m.key,
                               std::string("ensemble test ") + m.label + " (" + setting + ")", va,
                               vb, 4, m.direction));
    }
  }
}

void AddRunValues(const json& a, const json& b, RunComparison& c) {
  auto count = [](const json& r, const char* key) { return static_cast<double>(r[key].size()); };
  c.values.push_back(Value("temperature", "temperature", NumberAt(a, "/temperature"),
                           NumberAt(b, "/temperature"), 4, Direction::kNone));
  c.values.push_back(Value("members.finished", "members finished", count(a, "members"),
                           count(b, "members"), 0, Direction::kNone));
  c.values.push_back(Value("members.planned", "members planned", NumberAt(a, "/members_planned"),
                           NumberAt(b, "/members_planned"), 0, Direction::kNone));
  c.values.push_back(Value("members.failed", "members failed", count(a, "failed_members"),
                           count(b, "failed_members"), 0, Direction::kNone));
  const std::vector<double> wa = WeightSummary(a), wb = WeightSummary(b);
  const char* names[] = {"weights.min", "weights.max", "weights.effective_number"};
  const char* labels[] = {"smallest weight", "largest weight", "effective members (1/sum w^2)"};
  for (size_t i = 0; i < 3; ++i) {
    c.values.push_back(Value(names[i], labels[i], wa[i], wb[i], i == 2 ? 2 : 4, Direction::kNone));
  }
}

// What tells methods apart beyond test metrics: samples per member, what the run cost, how far
// its members disagree, and how well the ensemble's uncertainty flags the shifted rows.
void AddMethodValues(const json& a, const json& b, RunComparison& c) {
  const auto samples = [](const json& r) -> std::optional<double> {
    return NumberAt(r, "/members/0/samples");
  };
  c.values.push_back(Value("samples_per_member", "samples per member", samples(a), samples(b), 0, Direction::kNone));
  c.values.push_back(Value("compute.cpu_seconds_all_jobs", "CPU-seconds, all jobs",
                           NumberAt(a, "/compute/cpu_seconds_all_jobs"), NumberAt(b, "/compute/cpu_seconds_all_jobs"),
                           1, Direction::kLower));
  c.values.push_back(Value("diversity.between_members.mean_kl", "members' mean KL (nats)",
                           NumberAt(a, "/diversity/between_members/mean_kl"),
                           NumberAt(b, "/diversity/between_members/mean_kl"), 4, Direction::kNone));
  // The ensemble is the last of the shift section's predictives (report/report_model.h).
  const auto shift_auroc = [](const json& r, const char* score) -> std::optional<double> {
    if (!r.contains("shift") || r["shift"]["predictives"].empty()) return std::nullopt;
    const json& auroc = r["shift"]["predictives"].back()["auroc"];
    if (!auroc.contains(score) || !auroc[score].is_number()) return std::nullopt;
    return auroc[score].get<double>();
  };
  for (const char* score : {"entropy", "mutual_information", "total_std", "epistemic_std"}) {
    const std::optional<double> va = shift_auroc(a, score), vb = shift_auroc(b, score);
    if (!va && !vb) continue;
    std::string label = std::string("shifted rows: AUROC of ") + score;
    std::replace(label.begin(), label.end(), '_', ' ');
    c.values.push_back(Value(std::string("shift.ensemble.auroc.") + score, label, va, vb, 4, Direction::kHigher));
  }
}

std::string Cell(const std::optional<double>& v, int decimals) {
  return v ? FormatFixed(*v, decimals) : "-";
}

std::string Delta(const ComparedValue& v) {
  if (!v.a || !v.b) return "-";
  const double d = *v.b - *v.a;
  return (d >= 0 ? "+" : "") + FormatFixed(d, v.decimals);
}

std::string Row(const std::string& label, const std::string& a, const std::string& b,
                const std::string& delta, const std::string& note) {
  char line[256];
  std::snprintf(line, sizeof line, "%-38s %14s %14s %11s  %s", label.c_str(), a.c_str(), b.c_str(),
                delta.c_str(), note.c_str());
  std::string out = line;
  while (!out.empty() && out.back() == ' ') out.pop_back();
  return out + "\n";
}

}  // namespace

bool RunComparison::same_data() const {
  for (const ComparedText& t : texts) {
    if (t.key == "data_hash") return t.equal();
  }
  return false;
}

bool RunComparison::same_config() const {
  for (const ComparedText& t : texts) {
    if (t.key == "config_hash") return t.equal();
  }
  return false;
}

RunComparison CompareReports(const json& a, const json& b, const std::string& run_a,
                             const std::string& run_b) {
  RunComparison c;
  c.run_a = run_a;
  c.run_b = run_b;
  AddEnsembleMetrics(a, b, c);
  AddRunValues(a, b, c);
  AddMethodValues(a, b, c);
  // Reports written before the settings named the basin method had none of the new methods.
  const auto method = [](const json& r) {
    return r.contains("settings") ? r["settings"].value("basin_method", "none") : std::string("none");
  };
  c.texts.push_back({"basin_method", "basin method", method(a), method(b)});
  for (const char* key : {"task", "weighting", "data_hash", "config_hash"}) {
    std::string label = key;
    std::replace(label.begin(), label.end(), '_', ' ');
    c.texts.push_back({key, label, a[key].get<std::string>(), b[key].get<std::string>()});
  }
  return c;
}

std::string ComparisonTable(const RunComparison& c) {
  std::string out = "A: " + c.run_a + "\nB: " + c.run_b + "\n\n";
  out += Row("", "A", "B", "B - A", "better");
  for (const ComparedValue& v : c.values) {
    const std::string better = v.better == "a" ? "A" : v.better == "b" ? "B" : v.better;
    out += Row(v.label, Cell(v.a, v.decimals), Cell(v.b, v.decimals), Delta(v), better);
  }
  for (const ComparedText& t : c.texts) {
    const bool hash = t.key.find("hash") != std::string::npos;
    out += Row(t.label, hash ? t.a.substr(0, kShortHash) : t.a,
               hash ? t.b.substr(0, kShortHash) : t.b, "", t.equal() ? "equal" : "differ");
  }
  if (!c.same_data()) {
    out += "\nThe runs were measured on different data: their test metrics are not comparable.\n";
  }
  return out;
}

json ComparisonJson(const RunComparison& c) {
  json values = json::array(), texts = json::array();
  auto or_null = [](const std::optional<double>& v) { return v ? json(*v) : json(); };
  for (const ComparedValue& v : c.values) {
    values.push_back({{"key", v.key},
                      {"label", v.label},
                      {"a", or_null(v.a)},
                      {"b", or_null(v.b)},
                      {"delta", v.a && v.b ? json(*v.b - *v.a) : json()},
                      {"better", v.better.empty() ? json() : json(v.better)}});
  }
  for (const ComparedText& t : c.texts) {
    texts.push_back({{"key", t.key}, {"a", t.a}, {"b", t.b}, {"equal", t.equal()}});
  }
  return {{"a", c.run_a},
          {"b", c.run_b},
          {"values", values},
          {"texts", texts},
          {"same_data", c.same_data()},
          {"same_config", c.same_config()}};
}

}  // namespace chorus

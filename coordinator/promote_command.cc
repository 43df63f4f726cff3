#include "coordinator/promote_command.h"

#include <chrono>
#include <cstdio>
#include <ctime>
#include <memory>
#include <optional>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/file_util.h"
#include "common/log_format.h"
#include "coordinator/config_loader.h"
#include "report/html_text.h"
#include "coordinator/registry.h"
#include "coordinator/shift_gate.h"
#include "report/report_model.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

using nlohmann::json;

constexpr size_t kShiftedShown = 10;  // most shifted columns in decision.json
constexpr size_t kShiftedLogged = 3;  // and in the log line

// "2026-12-02T03:15:00Z".
std::string IsoTime(std::chrono::system_clock::time_point time) {
  const std::time_t t = std::chrono::system_clock::to_time_t(time);
  std::tm utc{};
  gmtime_r(&t, &utc);
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return text;
}

// The run's bundle, as bytes (what the registry stores) and verified, and its config.
struct Candidate {
  std::string path;
  std::string bytes;
  BundleFile file;
  Config config;
  std::string report;  // the run's report.json, "" if it has none
};

StatusOr<Candidate> LoadCandidate(const std::string& run_dir) {
  Candidate c;
  c.path = run_dir + "/bundle.chorus";
  CHORUS_ASSIGN_OR_RETURN(c.bytes, ReadFileToString(c.path, kMaxBundleFileBytes));
  CHORUS_ASSIGN_OR_RETURN(c.file, DecodeBundleFile(c.bytes, c.path));
  CHORUS_ASSIGN_OR_RETURN(c.config, LoadConfigFile(run_dir + "/config.yaml"));
  const StatusOr<std::string> report = ReadFileToString(run_dir + "/report.json");
  if (report.ok()) c.report = report.value();
  return c;
}

// The guard rows; the default (the run's test split) must still be the data the run had.
StatusOr<GuardData> LoadGuard(const PromoteOptions& o, const Candidate& c) {
  CHORUS_ASSIGN_OR_RETURN(GuardData guard, LoadGuardData(c.config, o.guard));
  if (o.guard.file.empty() && guard.data_hash != c.file.bundle.data_hash) {
    return Status::InvalidInput(
        o.run_dir + ": the run's data files changed since the run (prepared data hash " +
        guard.data_hash + ", the bundle's " + c.file.bundle.data_hash +
        "); restore them or name guard data with --guard");
  }
  return guard;
}

struct Incumbent {
  std::string id;
  BundleFile file;
  GateMetrics metrics;
};

StatusOr<std::optional<Incumbent>> ScoreCurrent(const Registry& registry, const GuardData& guard,
                                                int threads) {
  CHORUS_ASSIGN_OR_RETURN(const std::optional<std::string> id, registry.Current());
  if (!id.has_value()) return std::optional<Incumbent>();
  Incumbent current{*id, {}, {}};
  const std::string path = registry.BundlePath(*id);
  CHORUS_ASSIGN_OR_RETURN(current.file, ReadBundleFile(path));
  StatusOr<GateMetrics> metrics = ScoreOnGuard(current.file.bundle, guard, threads);
  if (!metrics.ok()) return metrics.status().WithContext("current bundle " + path);
  current.metrics = metrics.value();
  return std::optional<Incumbent>(std::move(current));
}

json BundleJson(const BundleFile& file, const GateMetrics& metrics) {
  const Bundle& b = file.bundle;
  return {{"sha256", file.payload_sha256}, {"run_name", b.run_name},
          {"chorus_version", b.chorus_version}, {"data_hash", b.data_hash},
          {"config_hash", b.config_hash}, {"metrics", GateMetricsJson(b.task, metrics)}};
}

// Everything the decision rested on: DIR/versions/ID/decision.json or DIR/refused/ID.json.
std::string DecisionJson(const PromoteOptions& o, const Candidate& c, const GateMetrics& scores,
                         const std::optional<Incumbent>& current, const GuardData& guard,
                         const GateDecision& d, const ShiftComparison& shift,
                         const std::string& id, std::chrono::system_clock::time_point now) {
  const Task task = c.file.bundle.task;
  json j = {{"verdict", d.promote ? "promote" : "refuse"},
            {"reasons", d.reasons},
            {"time", IsoTime(now)},
            {"version", id},
            {"chorus_version", CHORUS_VERSION},
            {"task", TaskName(task)},
            {"guard", {{"source", guard.source}, {"rows", guard.rows},
                       {"data_hash", guard.data_hash}, {"ece_bins", guard.ece_bins}}},
            {"limits", GateLimitsJson(task, o.limits)},
            {"candidate", BundleJson(c.file, scores)},
            {"current", nullptr},
            {"delta", nullptr},
            {"checks", GateChecksJson(d.checks)},
            {"shift", {{"skipped", shift.skipped}}}};
  j["candidate"]["run_dir"] = o.run_dir;
  if (current.has_value()) {
    j["current"] = BundleJson(current->file, current->metrics);
    j["current"]["version"] = current->id;
    j["delta"] = GateDeltaJson(task, scores, current->metrics);
    j["shift"] = ShiftComparisonJson(shift, current->file.bundle, c.file.bundle, kShiftedShown);
  }
  return j.dump(2) + "\n";
}

Status Prune(Registry& registry, int keep) {
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> removed, registry.Prune(keep));
  for (const std::string& id : removed) {
    LogLine(stderr, LogLevel::kInfo, "removed old version " + id, {{"removed", id}});
  }
  return Status::Ok();
}

// Copies the bundle in (verified), and only then switches `current` to it.
Status Install(Registry& registry, const Candidate& c, const std::string& id,
               const std::string& decision, int keep) {
  std::vector<std::pair<std::string, std::string>> files = {{"decision.json", decision}};
  if (!c.report.empty()) files.emplace_back("report.json", c.report);
  CHORUS_RETURN_IF_ERROR(registry.AddVersion(id, c.bytes, c.file.payload_sha256, files));
  CrashPointForTest("after_copy");
  CHORUS_RETURN_IF_ERROR(registry.SwitchCurrent(id));
  LogLine(stderr, LogLevel::kInfo, "promoted: current -> versions/" + id, {{"current", id}});
  return Prune(registry, keep);
}

// The comparison of the two bundles' training data: the most shifted columns and the labels.
void LogShift(const ShiftComparison& s) {
  if (!s.skipped.empty()) {
    LogLine(stderr, LogLevel::kInfo, "data shift not checked: " + s.skipped,
            {{"shift_skipped", s.skipped}});
    return;
  }
  std::string most;
  for (size_t i = 0; i < s.columns.size() && i < kShiftedLogged; ++i) {
    char text[160];
    std::snprintf(text, sizeof text, "%s%s PSI %.3f", i ? ", " : "", s.columns[i].column.c_str(),
                  s.columns[i].psi);
    most += text;
  }
  char labels[96];
  std::snprintf(labels, sizeof labels, "%s PSI %.3f", s.labels.column.c_str(), s.labels.psi);
  LogLine(stderr, LogLevel::kInfo,
          "data shift against the current bundle's training data: " +
              (most.empty() ? std::string("no column compared") : "most shifted " + most) + "; " +
              labels,
          {{"max_psi", s.columns.empty() ? 0.0 : s.columns.front().psi},
           {"most_shifted", s.columns.empty() ? std::string() : s.columns.front().column},
           {"labels_psi", s.labels.psi}, {"unmatched", s.unmatched.size()}});
}

// One line per check, then the verdict with its reasons.
void LogDecision(const GateDecision& d) {
  for (const GateCheck& c : d.checks) {
    char text[200];
    std::snprintf(text, sizeof text,
                  "%s: current %.6g, candidate %.6g, worse by %.6g (%.6g allowed): %s",
                  c.metric.c_str(), c.current, c.candidate, c.worsening, c.allowed,
                  c.passed ? "ok" : "FAIL");
    LogLine(stderr, LogLevel::kInfo, text,
            {{"metric", c.metric}, {"candidate", c.candidate}, {"current", c.current},
             {"worsening", c.worsening}, {"allowed", c.allowed}, {"passed", c.passed}});
  }
  std::string reasons;
  for (const std::string& r : d.reasons) reasons += (reasons.empty() ? "" : "; ") + r;
  const char* verdict = d.promote ? "promote" : "refuse";
  LogLine(stderr, d.promote ? LogLevel::kInfo : LogLevel::kWarning,
          std::string("gate: ") + verdict + " (" + reasons + ")",
          {{"verdict", verdict}, {"reasons", reasons}});
}

// With --refuse-if-baseline-better: why the run's own report rules the candidate out, or "".
std::string BaselineRefusal(const PromoteOptions& o) {
  if (!o.limits.refuse_if_baseline_better) return "";
  StatusOr<nlohmann::json> report = ReadRunReport(o.run_dir);
  if (!report.ok() || !report.value().contains("baseline") ||
      !report.value()["baseline"].contains("better_on_validation")) {
    return "--refuse-if-baseline-better: the run's report.json has no linear-baseline verdict";
  }
  const nlohmann::json& b = report.value()["baseline"];
  if (!b["better_on_validation"].get<bool>()) return "";
  return "--refuse-if-baseline-better: the linear baseline beat the ensemble on validation (nll " +
         FormatFixed(b.value("validation_nll", 0.0), 4) + " vs " +
         FormatFixed(b.value("ensemble_validation_nll", 0.0), 4) + ")";
}

// Applies the gate and records its decision: a promoted bundle becomes current, a refused one
// leaves only its decision in refused/.
Status Conclude(const PromoteOptions& o, Registry& registry, const Candidate& candidate,
                const GateMetrics& scores, const std::optional<Incumbent>& current,
                const GuardData& guard) {
  GateDecision d = DecideGate(candidate.file.bundle.task, scores,
                              current ? std::optional(current->metrics) : std::nullopt, o.limits);
  std::vector<std::string> refusals;
  if (const std::string refusal = BaselineRefusal(o); !refusal.empty()) refusals.push_back(refusal);
  const ShiftComparison shift =
      current ? CompareTrainingData(current->file.bundle, candidate.file.bundle, o.limits)
              : ShiftComparison{"no current bundle", {}, {}, {}, {}};
  LogShift(shift);
  refusals.insert(refusals.end(), shift.refusals.begin(), shift.refusals.end());
  if (!refusals.empty()) {
    if (d.promote) d.reasons.clear();
    d.promote = false;
    d.reasons.insert(d.reasons.end(), refusals.begin(), refusals.end());
  }
  LogDecision(d);
  const auto now = std::chrono::system_clock::now();
  const std::string id = registry.NewId(candidate.file.payload_sha256, now);
  const std::string decision =
      DecisionJson(o, candidate, scores, current, guard, d, shift, id, now);
  if (d.promote) return Install(registry, candidate, id, decision, o.keep);
  CHORUS_RETURN_IF_ERROR(registry.RecordRefusal(id, decision));
  CHORUS_RETURN_IF_ERROR(Prune(registry, o.keep));
  return Status::Refused("the gate refused the candidate; decision: " + registry.dir() +
                         "/refused/" + id + ".json");
}

Status Promote(const PromoteOptions& o) {
  CHORUS_ASSIGN_OR_RETURN(const Candidate candidate, LoadCandidate(o.run_dir));
  CHORUS_ASSIGN_OR_RETURN(const GuardData guard, LoadGuard(o, candidate));
  LogLine(stderr, LogLevel::kInfo,
          "guard data: " + std::to_string(guard.rows) + " rows of " + guard.source,
          {{"guard_rows", guard.rows}, {"guard", guard.source}});
  StatusOr<GateMetrics> scores = ScoreOnGuard(candidate.file.bundle, guard, o.threads);
  if (!scores.ok()) return scores.status().WithContext("candidate " + candidate.path);
  const auto on_wait = [] {
    LogLine(stderr, LogLevel::kInfo, "waiting for another promote to release the registry");
  };
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<Registry> registry,
                          Registry::Open(o.registry_dir, on_wait));
  CHORUS_ASSIGN_OR_RETURN(const std::optional<Incumbent> current,
                          ScoreCurrent(*registry, guard, o.threads));
  if (current.has_value() && current->file.payload_sha256 == candidate.file.payload_sha256) {
    LogLine(stderr, LogLevel::kInfo,
            "the candidate already is current (versions/" + current->id + ")",
            {{"current", current->id}});
    return Status::Ok();
  }
  return Conclude(o, *registry, candidate, scores.value(), current, guard);
}

}  // namespace

int PromoteCommand(const PromoteOptions& options) {
  const Status st = Promote(options);
  if (!st.ok()) {
    LogLine(stderr, st.code() == Status::Code::kRefused ? LogLevel::kWarning : LogLevel::kError,
            "chorus promote: " + st.ToString());
  }
  return st.ExitCode();
}

}  // namespace chorus

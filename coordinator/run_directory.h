// A run directory: where one execution of a config leaves everything it produced
// (docs/design.md, "Vocabulary"). Thread safety: LogEvent may be called from several threads;
// everything else from one.
#pragma once

#include <mutex>
#include <map>
#include <string>

#include <nlohmann/json.hpp>

#include "common/member_training.h"
#include "common/status.h"

namespace chorus {

// A job's CPU-seconds as its finished event carries them: {"training", "basin_fit", "samples"}.
nlohmann::json CpuSecondsJson(const MemberResult::CpuSeconds& cpu);

class RunDirectory {
 public:
  // Creates OUT_DIR/NAME-YYYYMMDD-HHMMSS (UTC; "-2", "-3"... appended if taken) with jobs/ inside.
  static StatusOr<RunDirectory> Create(const std::string& out_dir, const std::string& name);
  // An existing run directory (for --resume). kInvalidInput if it has no config.yaml, or if
  // anything inside it is a symbolic link (a planted link could send results or logs elsewhere;
  // chorus itself never makes one).
  static StatusOr<RunDirectory> Open(const std::string& path);

  const std::string& path() const { return path_; }
  std::string File(const std::string& name) const { return path_ + "/" + name; }
  // jobs/<name>/ (name: common/member_training.h JobName), created on first use; kInvalidInput
  // if it is a symbolic link.
  StatusOr<std::string> JobDir(const std::string& name) const;
  // jobs/<name>/result.pb, whether or not it exists.
  std::string JobResultPath(const std::string& name) const { return path_ + "/jobs/" + name + "/result.pb"; }

  // Appends {"time": ISO-8601 UTC, "event": kind, ...fields} to events.jsonl.
  Status LogEvent(const std::string& kind, nlohmann::json fields = nlohmann::json::object());
  // The jobs events.jsonl records as finished (member_finished / job_finished), each with its
  // last such event; unreadable or torn lines are skipped. For resume (a result whose event was
  // lost in a crash) and the report (the CPU-seconds the events carry).
  std::map<std::string, nlohmann::json> FinishedJobEvents() const;
  // The CPU-seconds of every job whose finished event carries them (CpuSecondsJson), by job name.
  std::map<std::string, MemberResult::CpuSeconds> JobCpuSeconds() const;

  // A job finished or failed: member_finished / member_failed for members, job_finished /
  // job_failed (with "role") for fold and search jobs; "member" and "job" (its name) added to
  // `fields`.
  Status LogJobEvent(const MemberSpec& spec, bool failed, nlohmann::json fields);

  RunDirectory(RunDirectory&& other) noexcept : path_(std::move(other.path_)) {}

 private:
  explicit RunDirectory(std::string path) : path_(std::move(path)) {}
  std::string path_;
  std::mutex events_mutex_;
};

// Now as "2026-12-01T23:45:12Z".
std::string UtcTimestamp();

}  // namespace chorus

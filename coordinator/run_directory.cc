#include "coordinator/run_directory.h"

#include <sys/stat.h>

#include <fstream>

#include <cerrno>
#include <cstring>
#include <ctime>
#include <filesystem>

#include "common/file_util.h"

namespace chorus {
namespace {

std::string FormatUtc(const char* format) {
  const std::time_t now = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&now, &tm);
  char buf[64];
  std::strftime(buf, sizeof buf, format, &tm);
  return buf;
}

Status NotALink(const std::string& path) {
  return Status::InvalidInput(path + ": is a symbolic link; a run directory holds only the files "
                              "and directories chorus made, and chorus makes no links");
}

}  // namespace

std::string UtcTimestamp() { return FormatUtc("%Y-%m-%dT%H:%M:%SZ"); }

StatusOr<RunDirectory> RunDirectory::Create(const std::string& out_dir, const std::string& name) {
  CHORUS_RETURN_IF_ERROR(MakeDirectories(out_dir));
  const std::string stem = out_dir + "/" + name + "-" + FormatUtc("%Y%m%d-%H%M%S");
  for (int attempt = 1; attempt < 1000; ++attempt) {
    const std::string path = attempt == 1 ? stem : stem + "-" + std::to_string(attempt);
    if (::mkdir(path.c_str(), 0755) == 0) {
      CHORUS_RETURN_IF_ERROR(MakeDirectories(path + "/jobs"));
      return RunDirectory(path);
    }
    if (errno != EEXIST) return Status::Io(path + ": cannot create run directory: " + std::strerror(errno));
  }
  return Status::Io(stem + ": too many run directories with this name and time");
}

StatusOr<RunDirectory> RunDirectory::Open(const std::string& path) {
  struct stat st {};
  if (::stat((path + "/config.yaml").c_str(), &st) != 0) {
    return Status::InvalidInput(path + ": not a run directory (no config.yaml)");
  }
  std::error_code ec;
  for (auto it = std::filesystem::recursive_directory_iterator(path, ec);
       !ec && it != std::filesystem::recursive_directory_iterator(); it.increment(ec)) {
    if (it->is_symlink(ec)) return NotALink(it->path().string());
  }
  if (ec) return Status::Io(path + ": cannot list the run directory: " + ec.message());
  CHORUS_RETURN_IF_ERROR(MakeDirectories(path + "/jobs"));
  return RunDirectory(path);
}

StatusOr<std::string> RunDirectory::JobDir(const std::string& name) const {
  const std::string dir = path_ + "/jobs/" + name;
  struct stat st {};
  if (::lstat(dir.c_str(), &st) == 0 && S_ISLNK(st.st_mode)) return NotALink(dir);
  CHORUS_RETURN_IF_ERROR(MakeDirectories(dir));
  return dir;
}

nlohmann::json CpuSecondsJson(const MemberResult::CpuSeconds& cpu) {
  return {{"training", cpu.training}, {"basin_fit", cpu.basin_fit}, {"samples", cpu.samples}};
}

Status RunDirectory::LogJobEvent(const MemberSpec& spec, bool failed, nlohmann::json fields) {
  const bool member = spec.role == JobRole::kMember;
  fields["member"] = spec.index;
  fields["job"] = JobName(spec);
  if (!member) fields["role"] = JobRoleName(spec.role);
  return LogEvent(member ? (failed ? "member_failed" : "member_finished")
                         : (failed ? "job_failed" : "job_finished"), fields);
}

std::map<std::string, nlohmann::json> RunDirectory::FinishedJobEvents() const {
  std::map<std::string, nlohmann::json> jobs;
  std::ifstream in(File("events.jsonl"));
  std::string line;
  while (std::getline(in, line)) {
    const nlohmann::json e = nlohmann::json::parse(line, nullptr, false);
    if (!e.is_object() || !e.contains("job") || !e["job"].is_string()) continue;
    const std::string kind = e.value("event", "");
    if (kind == "member_finished" || kind == "job_finished") jobs[e["job"].get<std::string>()] = e;
  }
  return jobs;
}

std::map<std::string, MemberResult::CpuSeconds> RunDirectory::JobCpuSeconds() const {
  std::map<std::string, MemberResult::CpuSeconds> costs;
  for (const auto& [job, event] : FinishedJobEvents()) {
    const nlohmann::json* c = event.contains("cpu_seconds") ? &event["cpu_seconds"] : nullptr;
    if (c == nullptr || !c->is_object()) continue;
    const auto number = [c](const char* key) {
      return c->contains(key) && (*c)[key].is_number() ? (*c)[key].get<double>() : -1.0;
    };
    const MemberResult::CpuSeconds cpu{number("training"), number("basin_fit"), number("samples")};
    if (cpu.training >= 0 && cpu.basin_fit >= 0 && cpu.samples >= 0) costs[job] = cpu;
  }
  return costs;
}

Status RunDirectory::LogEvent(const std::string& kind, nlohmann::json fields) {
  nlohmann::json line = {{"time", UtcTimestamp()}, {"event", kind}};
  line.update(fields);
  std::lock_guard<std::mutex> lock(events_mutex_);
  return AppendLine(File("events.jsonl"), line.dump());
}

}  // namespace chorus

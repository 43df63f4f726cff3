#include "coordinator/history_command.h"

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/file_util.h"
#include "common/log_format.h"
#include "coordinator/registry.h"
#include "report/history_html.h"

namespace chorus {
namespace history_command {

namespace fs = std::filesystem;
using nlohmann::json;

// The decision files the registry keeps: versions/ID/decision.json and refused/*.json.
StatusOr<std::vector<std::string>> DecisionFiles(const std::string& dir) {
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> versions, Registry::VersionsIn(dir));
  std::vector<std::string> files;
  for (const std::string& id : versions) {
    const std::string path = dir + "/versions/" + id + "/decision.json";
    if (fs::exists(path)) files.push_back(path);
  }
  std::error_code ec;
  for (fs::directory_iterator it(dir + "/refused", ec), end; !ec && it != end; it.increment(ec)) {
    if (it->path().extension() == ".json") files.push_back(it->path().string());
  }
  return files;
}

StatusOr<json> ReadDecision(const std::string& path) {
  CHORUS_ASSIGN_OR_RETURN(const std::string text, ReadFileToString(path, int64_t{16} << 20));
  json d = json::parse(text, nullptr, false);
  if (d.is_discarded()) return Status::InvalidInput(path + ": not JSON; expected a decision as chorus promote writes it");
  const std::string problem = CheckDecision(d);
  if (!problem.empty()) return Status::InvalidInput(path + ": " + problem + " (a decision as chorus promote writes it)");
  return d;
}

Status WriteHistory(const HistoryOptions& o, std::string* written) {
  CHORUS_RETURN_IF_ERROR(Registry::CheckIsRegistry(o.registry_dir));
  CHORUS_ASSIGN_OR_RETURN(const std::optional<std::string> current, Registry::CurrentIn(o.registry_dir));
  json history = {{"registry", o.registry_dir}, {"current", current ? json(*current) : json()},
                  {"task", "classification"}, {"decisions", json::array()}, {"rollbacks", json::array()}};
  std::string task_from;
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> files, DecisionFiles(o.registry_dir));
  for (const std::string& path : files) {
    CHORUS_ASSIGN_OR_RETURN(json d, ReadDecision(path));
    if (!task_from.empty() && d["task"] != history["task"]) {
      return Status::InvalidInput(path + ": a " + d["task"].get<std::string>() + " decision in a registry whose " +
                                  task_from + " is " + history["task"].get<std::string>());
    }
    if (task_from.empty()) history["task"] = d["task"], task_from = path;
    history["decisions"].push_back(std::move(d));
  }
  std::sort(history["decisions"].begin(), history["decisions"].end(), [](const json& a, const json& b) {
    return std::make_pair(a["time"].get<std::string>(), a["version"].get<std::string>()) <
           std::make_pair(b["time"].get<std::string>(), b["version"].get<std::string>());
  });
  CHORUS_ASSIGN_OR_RETURN(const std::vector<Registry::Rollback> rollbacks, Registry::RollbacksIn(o.registry_dir));
  for (const Registry::Rollback& r : rollbacks) {
    history["rollbacks"].push_back({{"time", r.time}, {"from", r.from}, {"to", r.to}});
  }
  *written = o.out.empty() ? o.registry_dir + "/history.html" : o.out;
  CHORUS_RETURN_IF_ERROR(WriteFileAtomic(*written, HistoryHtml(history)));
  LogLine(stderr, LogLevel::kInfo,
          "history: " + std::to_string(history["decisions"].size()) + " decisions, " +
              std::to_string(history["rollbacks"].size()) + " rollbacks: " + *written,
          {{"decisions", static_cast<long long>(history["decisions"].size())},
           {"rollbacks", static_cast<long long>(history["rollbacks"].size())}, {"page", *written}});
  return Status::Ok();
}

}  // namespace history_command

int HistoryCommand(const HistoryOptions& options) {
  std::string written;
  const Status st = history_command::WriteHistory(options, &written);
  if (!st.ok()) {
    LogLine(stderr, LogLevel::kError, "chorus history: " + st.ToString());
    return st.ExitCode();
  }
  std::printf("%s\n", written.c_str());
  return 0;
}

}  // namespace chorus

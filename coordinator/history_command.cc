#include "coordinator/history_command.h"

#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/file_util.h"
#include "common/log_format.h"
#include "report/history_html.h"

namespace chorus {
namespace history_command {

namespace fs = std::filesystem;
using nlohmann::json;

// The decision files the registry keeps: versions/ID/decision.json and refused/*.json.
std::vector<std::string> DecisionFiles(const std::string& dir) {
  std::vector<std::string> files;
  std::error_code ec;
  for (fs::directory_iterator it(dir + "/versions", ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    if (!name.empty() && name[0] != '.' && fs::exists(it->path() / "decision.json")) {
      files.push_back((it->path() / "decision.json").string());
    }
  }
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

StatusOr<json> ReadRollbacks(const std::string& dir) {
  const std::string path = dir + "/rollbacks.jsonl";
  json lines = json::array();
  if (!fs::exists(path)) return lines;
  CHORUS_ASSIGN_OR_RETURN(const std::string text, ReadFileToString(path));
  std::istringstream in(text);
  int number = 0;
  for (std::string line; std::getline(in, line);) {
    ++number;
    json j = json::parse(line, nullptr, false);
    const bool ok = !j.is_discarded() && j.is_object();
    if (!ok || !j.contains("time") || !j["time"].is_string() || !j.contains("from") || !j["from"].is_string() ||
        !j.contains("to") || !j["to"].is_string()) {
      return Status::InvalidInput(path + ":" + std::to_string(number) +
                                  ": expected {\"time\", \"from\", \"to\"} as chorus rollback writes");
    }
    lines.push_back(std::move(j));
  }
  return lines;
}

// The current version's ID from DIR/current, or null.
json CurrentId(const std::string& dir) {
  std::error_code ec;
  const std::string target = fs::read_symlink(dir + "/current", ec).string();
  if (ec || target.rfind("versions/", 0) != 0) return nullptr;
  return target.substr(9);
}

Status WriteHistory(const HistoryOptions& o, std::string* written) {
  if (!fs::is_directory(o.registry_dir + "/versions")) {
    return Status::InvalidInput(o.registry_dir + ": not a registry (no versions/ directory)");
  }
  json history = {{"registry", o.registry_dir}, {"current", CurrentId(o.registry_dir)}, {"task", "classification"},
                  {"decisions", json::array()}};
  std::string task_from;
  for (const std::string& path : DecisionFiles(o.registry_dir)) {
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
  CHORUS_ASSIGN_OR_RETURN(history["rollbacks"], ReadRollbacks(o.registry_dir));
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

#include "tests/testing/run_dir.h"

#include <filesystem>
#include <fstream>

#include "tests/testing/process.h"

namespace chorus::testing {

namespace fs = std::filesystem;

std::string RunDirUnder(const std::string& out) {
  if (!fs::exists(out)) return "";
  for (const auto& e : fs::directory_iterator(out)) {
    if (e.path().filename().string()[0] != '.') return e.path().string();
  }
  return "";
}

std::vector<nlohmann::json> ReadEvents(const std::string& run_dir) {
  std::vector<nlohmann::json> events;
  std::ifstream f(run_dir + "/events.jsonl");
  for (std::string line; std::getline(f, line);) events.push_back(nlohmann::json::parse(line));
  return events;
}

int CountEvents(const std::string& run_dir, const std::string& kind) {
  int n = 0;
  for (const nlohmann::json& e : ReadEvents(run_dir)) n += e["event"] == kind;
  return n;
}

std::map<std::string, std::string> JobResults(const std::string& run_dir) {
  std::map<std::string, std::string> bytes;
  for (const auto& e : fs::recursive_directory_iterator(run_dir + "/jobs")) {
    if (e.path().filename() == "result.pb") {
      bytes[fs::relative(e.path(), run_dir).string()] = ReadTextFile(e.path().string());
    }
  }
  return bytes;
}

nlohmann::json WaitForCoordinator(const std::string& out, double seconds) {
  nlohmann::json info;
  WaitFor([&] {
    const std::string run = RunDirUnder(out);
    if (run.empty() || !fs::exists(run + "/coordinator.json")) return false;
    info = nlohmann::json::parse(ReadTextFile(run + "/coordinator.json"));
    return true;
  }, seconds);
  return info;
}

}  // namespace chorus::testing

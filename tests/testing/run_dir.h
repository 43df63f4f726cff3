// Reading what a `chorus run` left behind, for tests: the run directory under an --out folder,
// its events.jsonl, its job results, and the coordinator's published address.
// Thread safety: free functions; read files only.
#pragma once

#include <map>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace chorus::testing {

// The run directory directly under `out` (its first entry not starting with '.', which skips the
// workers' data cache), or "" if there is none yet.
std::string RunDirUnder(const std::string& out);

// Every line of RUN_DIR/events.jsonl, parsed; empty if the file does not exist yet.
std::vector<nlohmann::json> ReadEvents(const std::string& run_dir);

// How many events of `kind` RUN_DIR/events.jsonl holds.
int CountEvents(const std::string& run_dir, const std::string& kind);

// RUN_DIR/jobs/*/result.pb by path relative to RUN_DIR, with their bytes.
std::map<std::string, std::string> JobResults(const std::string& run_dir);

// Waits up to `seconds` for the run under `out` to publish coordinator.json; null on timeout.
nlohmann::json WaitForCoordinator(const std::string& out, double seconds = 30);

}  // namespace chorus::testing

// Where the wall time of `chorus run` goes: the phases of a run in order (loading, the training
// jobs, assembly, size grid, baseline, ...) with their seconds, for report.json's "phases" and the
// page's run facts. A phase ends when the next is named; steady clock.
// Thread safety: one thread (the coordinator's main thread).
#pragma once

#include <chrono>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

namespace chorus {

class RunPhases {
 public:
  RunPhases() : start_(Clock::now()), last_(start_) {}

  // Ends the phase running since the last call (or construction) and records it as `name`.
  void End(const std::string& name);
  // Records a part of the phase now running, measured by its own clock: it is moved out of that
  // phase's seconds into its own entry when the phase ends.
  void Part(const std::string& name, double seconds) { parts_.emplace_back(name, seconds); }
  double Seconds() const { return std::chrono::duration<double>(Clock::now() - start_).count(); }

  // [{"phase": name, "seconds": s}, ...] in order, then {"phase": "total", ...} up to now.
  nlohmann::json Json() const;

 private:
  using Clock = std::chrono::steady_clock;
  Clock::time_point start_, last_;
  std::vector<std::pair<std::string, double>> phases_, parts_;
};

}  // namespace chorus

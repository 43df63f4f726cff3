#include "coordinator/run_phases.h"

namespace chorus {

void RunPhases::End(const std::string& name) {
  const Clock::time_point now = Clock::now();
  double seconds = std::chrono::duration<double>(now - last_).count();
  for (const auto& part : parts_) seconds -= part.second;
  phases_.emplace_back(name, seconds);
  phases_.insert(phases_.end(), parts_.begin(), parts_.end());
  parts_.clear();
  last_ = now;
}

nlohmann::json RunPhases::Json() const {
  nlohmann::json out = nlohmann::json::array();
  for (const auto& [name, seconds] : phases_) out.push_back({{"phase", name}, {"seconds", seconds}});
  out.push_back({{"phase", "total"}, {"seconds", Seconds()}});
  return out;
}

}  // namespace chorus

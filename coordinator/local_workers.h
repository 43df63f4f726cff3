// The embedded default: chorus-worker processes that `chorus run` starts on this machine, bound
// to the coordinator's loopback address, and stops when the run ends.
// Thread safety: use from one thread.
#pragma once

#include <sys/types.h>

#include <string>
#include <vector>

#include "common/status.h"

namespace chorus {

class LocalWorkers {
 public:
  LocalWorkers() = default;
  LocalWorkers(const LocalWorkers&) = delete;
  LocalWorkers& operator=(const LocalWorkers&) = delete;
  // Stops any still running (SIGTERM, then SIGKILL after a grace period).
  ~LocalWorkers();

  // Starts `count` copies of `worker_binary` with `args` (argv[1..]). stderr goes to `log_file`.
  Status Start(const std::string& worker_binary, const std::vector<std::string>& args, int count,
               const std::string& log_file);

  // Waits up to `seconds` for all to exit on their own; returns how many are still running.
  int WaitForExit(double seconds);

  // SIGTERM, wait up to `grace_seconds`, then SIGKILL whatever is left; reaps all.
  void Stop(double grace_seconds);

  const std::vector<pid_t>& pids() const { return pids_; }

 private:
  std::vector<pid_t> pids_;  // still running (not yet reaped)
};

// The chorus-worker executable next to the running chorus executable.
std::string WorkerBinaryPath();

}  // namespace chorus

// `chorus promote RUN_DIR --registry DIR`: scores the run's bundle and the registry's current
// bundle on the same guard data (coordinator/guard_data.h), applies the gate
// (coordinator/gate.h), records the decision in the registry (coordinator/registry.h) and, only
// if the gate passes, copies the bundle in and switches `current` to it.
// Thread safety: call from one thread; it runs its own oneTBB arena. Concurrent promotes into
// one registry, from any processes, take turns on the registry's lock.
#pragma once

#include <string>

#include "coordinator/gate.h"
#include "coordinator/guard_data.h"

namespace chorus {

struct PromoteOptions {
  std::string run_dir;
  std::string registry_dir;
  GuardSource guard;  // empty: the run's test split
  GateLimits limits;
  int keep = 10;    // versions kept (the current one is never removed), >= 1
  int threads = 0;  // scoring threads, 0 = all cores; speed only
};

// Returns the exit code: 0 promoted (or the candidate already is current); 3 refused by the
// gate (the decision is in DIR/refused/, `current` untouched); 2 bad input (no bundle or
// config in RUN_DIR, unreadable guard data, a corrupt current bundle, a task mismatch);
// 1 internal or I/O failure. Progress and the decision are logged on stderr
// (common/log_format.h).
int PromoteCommand(const PromoteOptions& options);

}  // namespace chorus

// `chorus rollback --registry DIR [--to ID]`: points the registry's `current` back at an earlier
// version (coordinator/registry.h), after checking that version's bundle checksum, and records
// the switch in DIR/rollbacks.jsonl. Without --to, the newest version older than the current one
// that no earlier rollback moved away from: repeated rollbacks walk back through the kept
// versions, and rolling back a promotion that followed a rollback skips the version rolled back.
// Thread safety: call from one thread; takes the registry's lock, so a promote and a rollback
// from any processes take turns.
#pragma once

#include <string>

namespace chorus {

struct RollbackOptions {
  std::string registry_dir;
  std::string to;  // a version ID; empty: the version before the current one
};

// Returns the exit code: 0 switched (or the target already is current); 2 bad input (not a
// registry, no current version, no earlier version, an unknown ID, a target bundle that does not
// verify), with `current` untouched; 1 I/O failure. The new current ID goes to stdout, the
// switch to stderr (common/log_format.h).
int RollbackCommand(const RollbackOptions& options);

}  // namespace chorus

// `chorus history --registry DIR [-o FILE]`: a page (report/history_html.h) with every decision
// the registry keeps (DIR/versions/*/decision.json and DIR/refused/*.json, by time) and every
// rollback (DIR/rollbacks.jsonl). Reads the registry without taking its lock and changes nothing
// in it but the page, written atomically (default DIR/history.html).
// Thread safety: call from one thread.
#pragma once

#include <string>

namespace chorus {

struct HistoryOptions {
  std::string registry_dir;
  std::string out;  // empty: DIR/history.html
};

// Returns the exit code: 0 written; 2 bad input (not a registry, a decision or rollback record
// that is not what chorus writes, decisions of different tasks); 1 I/O failure. The page's path
// goes to stdout.
int HistoryCommand(const HistoryOptions& options);

}  // namespace chorus

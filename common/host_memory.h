// How much memory this process may use: the machine's physical memory, or less when a cgroup
// (v2 memory.max, v1 memory.limit_in_bytes) sets a lower limit, as in containers and systemd
// units with MemoryMax. Thread safety: reentrant.
#pragma once

#include <cstdint>
#include <string>

namespace chorus {

struct MemoryLimit {
  int64_t bytes = 0;
  std::string source;  // "physical memory" or the cgroup file that set the limit
};

MemoryLimit UsableMemory();

}  // namespace chorus

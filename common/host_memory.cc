#include "common/host_memory.h"

#include <unistd.h>

#include <fstream>
#include <string>
#include <vector>

namespace chorus {
namespace {

// The number in a cgroup limit file, or -1 when it is missing, "max" or not a number.
int64_t CgroupLimit(const std::string& path) {
  std::ifstream in(path);
  std::string text;
  if (!(in >> text) || text == "max") return -1;
  try {
    size_t used = 0;
    const long long value = std::stoll(text, &used);
    return used == text.size() && value > 0 ? value : -1;
  } catch (const std::exception&) {
    return -1;
  }
}

// The limit files that apply to this process, from /proc/self/cgroup: for cgroup v2 ("0::PATH")
// memory.max of PATH and of every group above it; for v1 ("N:...memory...:PATH")
// memory.limit_in_bytes likewise.
std::vector<std::string> LimitFiles() {
  std::vector<std::string> files;
  std::ifstream in("/proc/self/cgroup");
  std::string line;
  while (std::getline(in, line)) {
    const size_t first = line.find(':'), second = line.find(':', first + 1);
    if (first == std::string::npos || second == std::string::npos) continue;
    const std::string controllers = line.substr(first + 1, second - first - 1);
    std::string path = line.substr(second + 1);
    std::vector<std::pair<std::string, std::string>> mounts;  // (mount point, limit file)
    if (controllers.empty()) {
      mounts = {{"/sys/fs/cgroup", "memory.max"}, {"/sys/fs/cgroup/unified", "memory.max"}};
    } else if (("," + controllers + ",").find(",memory,") != std::string::npos) {
      mounts = {{"/sys/fs/cgroup/memory", "memory.limit_in_bytes"}};
    } else {
      continue;
    }
    while (true) {
      for (const auto& [mount, file] : mounts) {
        files.push_back(mount + (path == "/" ? "" : path) + "/" + file);
      }
      if (path.empty() || path == "/") break;
      path = path.substr(0, path.find_last_of('/'));
      if (path.empty()) path = "/";
    }
  }
  return files;
}

}  // namespace

MemoryLimit UsableMemory() {
  MemoryLimit limit{static_cast<int64_t>(sysconf(_SC_PHYS_PAGES)) * sysconf(_SC_PAGESIZE),
                    "physical memory"};
  for (const std::string& file : LimitFiles()) {
    const int64_t cgroup = CgroupLimit(file);
    if (cgroup > 0 && cgroup < limit.bytes) limit = {cgroup, file};
  }
  return limit;
}

}  // namespace chorus

#include "tests/fuzz/fuzz_file.h"

#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <set>

namespace chorus::fuzz {
namespace {

// Every scratch file made, removed by an atexit handler.
std::set<std::string>& ScratchFiles() {
  static std::set<std::string> files;
  static const bool registered = [] {
    return std::atexit([] {
      for (const std::string& f : ScratchFiles()) std::remove(f.c_str());
    }) == 0;
  }();
  (void)registered;
  return files;
}

}  // namespace

std::string WriteScratchFile(const uint8_t* data, size_t size, const std::string& suffix) {
  const char* tmp = std::getenv("TMPDIR");
  const std::string path = std::string(tmp != nullptr && *tmp != '\0' ? tmp : "/tmp") +
                           "/chorus-fuzz-" + std::to_string(getpid()) + suffix;
  ScratchFiles().insert(path);
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (f == nullptr || (size > 0 && std::fwrite(data, 1, size, f) != size) || std::fclose(f) != 0) {
    std::perror(path.c_str());
    std::abort();
  }
  return path;
}

}  // namespace chorus::fuzz

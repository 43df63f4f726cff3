#include "common/host_name.h"

#include <unistd.h>

namespace chorus {

std::string HostName() {
  char buf[256] = {};
  if (gethostname(buf, sizeof buf - 1) != 0) return "";
  return buf;
}

}  // namespace chorus

// This machine's host name, for manifests, events and worker registration.
// Thread safety: reentrant.
#pragma once

#include <string>

namespace chorus {

// gethostname(2), or "" if it fails.
std::string HostName();

}  // namespace chorus

// MemberSpec (common/member_training.h) <-> the wire MemberSpec (service.proto).
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include "common/member_training.h"
#include "common/status.h"
#include "service.pb.h"

namespace chorus {

void SpecToWire(const MemberSpec& spec, wire::MemberSpec* out);

// Errors (kInvalidInput): unknown activation, schedule or basin method names, values out of the
// ranges the config loader enforces.
StatusOr<MemberSpec> SpecFromWire(const wire::MemberSpec& w);

}  // namespace chorus

// MemberSpec (common/member_training.h) <-> the wire MemberSpec (service.proto).
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include "common/member_training.h"
#include "common/status.h"
#include "service.pb.h"

namespace chorus {

// The largest lease reply a worker accepts, in bytes: a warm-started job carries its member's
// starting weights (4 bytes each), so the coordinator refuses warm starts of networks whose
// weights would not fit (coordinator/warm_start.h).
constexpr int kMaxLeaseReplyBytes = 64 << 20;

// start_parameters: the member's own starting point only (train.start_points[index mod size]).
void SpecToWire(const MemberSpec& spec, wire::MemberSpec* out);

// Errors (kInvalidInput): unknown activation, schedule or basin method names, values out of the
// ranges the config loader enforces.
StatusOr<MemberSpec> SpecFromWire(const wire::MemberSpec& w);

}  // namespace chorus

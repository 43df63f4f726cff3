// Training several members at once on this machine, on a oneTBB arena. Each member trains on one
// thread, so its result does not depend on the thread count (common/member_training.h).
// Thread safety: call from one thread; the callbacks are invoked one at a time (serialised by an
// internal mutex), from the arena's threads.
#pragma once

#include <functional>
#include <vector>

#include "common/dataset.h"
#include "common/member_training.h"

namespace chorus {

using MemberDoneFn = std::function<void(const MemberSpec&, const StatusOr<MemberResult>&)>;

// Trains every spec with up to `threads` members at a time (0 = one per hardware thread).
// Returns the results in the order of `specs`. `progress` and `done` may be empty.
std::vector<StatusOr<MemberResult>> TrainMembersLocally(const std::vector<MemberSpec>& specs,
                                                        const PreparedData& data, int threads,
                                                        const ProgressFn& progress,
                                                        const MemberDoneFn& done);

}  // namespace chorus

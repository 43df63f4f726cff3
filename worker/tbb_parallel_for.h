// common/training_step.h's ParallelFor over oneTBB: the parts of a minibatch become tasks of the
// arena the calling thread runs in, so they use only threads that arena may use (idle slots).
// Thread safety: stateless; one instance may serve every thread.
#pragma once

#include "common/training_step.h"

namespace chorus {

class TbbParallelFor final : public ParallelFor {
 public:
  void Run(int count, void (*body)(void* context, int i), void* context) const override;
};

}  // namespace chorus

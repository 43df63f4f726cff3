#include "worker/tbb_parallel_for.h"

#include <tbb/parallel_for.h>

namespace chorus {

void TbbParallelFor::Run(int count, void (*body)(void* context, int i), void* context) const {
  // One task per part (grain 1, simple partitioner): parts are few and each is large.
  tbb::parallel_for(tbb::blocked_range<int>(0, count, 1),
                    [&](const tbb::blocked_range<int>& r) {
                      for (int i = r.begin(); i != r.end(); ++i) body(context, i);
                    },
                    tbb::simple_partitioner());
}

}  // namespace chorus

#include "execution/tbb_parallel_for.h"

#include <tbb/parallel_for.h>

namespace chorus {

void TbbParallelFor::Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const {
  // One task per item (grain 1, simple partitioner): items are few and each is large (a
  // minibatch part, a bundle sample).
  tbb::parallel_for(tbb::blocked_range<int64_t>(0, count, 1),
                    [&](const tbb::blocked_range<int64_t>& r) {
                      for (int64_t i = r.begin(); i != r.end(); ++i) body(context, i);
                    },
                    tbb::simple_partitioner());
}

}  // namespace chorus

// A process-wide count of heap allocations: this binary replaces malloc, calloc, realloc,
// posix_memalign, aligned_alloc and memalign (operator new goes through malloc), forwarding to
// glibc's own entry points. Counting is off until StartCountingAllocations.
// Thread safety: the count is atomic and covers every thread.
#pragma once

#include <cstdint>

namespace chorus::testing {

void StartCountingAllocations();
// Stops counting; returns the allocations made since StartCountingAllocations.
int64_t StopCountingAllocations();

}  // namespace chorus::testing

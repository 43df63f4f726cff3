// How glibc's allocator gives freed memory back to the kernel, set once at the start of a
// program that moves data sets of hundreds of MiB. Thread safety: call before threads start.
#pragma once

namespace chorus {

// By default glibc hands the free top of a thread's heap back in 64 KiB pieces as soon as it
// exceeds 128 KiB (madvise MADV_DONTNEED), so receiving a data set through gRPC frees and
// re-faults the same pages over and over; on the development VM each of those calls cost a
// cross-CPU TLB flush and fetching a 210 MiB data set took 1.5-1.8 s. With freed memory kept
// for reuse up to 256 MiB and buffers over 32 MiB still mapped and unmapped whole, it took
// 0.6-0.8 s. No effect on other C libraries.
void KeepFreedHeapMemoryForReuse();

}  // namespace chorus

#include "common/huge_pages.h"

#include <sys/mman.h>

#include <cstdint>

namespace chorus {

void AdviseHugePages(void* p, size_t bytes) {
#ifdef MADV_HUGEPAGE
  constexpr uintptr_t kHugePage = uintptr_t{2} << 20;
  if (p == nullptr || bytes < 2 * kHugePage) return;
  const uintptr_t start = reinterpret_cast<uintptr_t>(p);
  const uintptr_t begin = (start + kHugePage - 1) & ~(kHugePage - 1);
  const uintptr_t end = (start + bytes) & ~(kHugePage - 1);
  if (end > begin) ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_HUGEPAGE);
#else
  (void)p;
  (void)bytes;
#endif
}

}  // namespace chorus

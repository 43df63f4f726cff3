#include "common/cpu_account.h"

#include <time.h>

namespace chorus {
namespace {

// CPU time that regions nested in this thread's innermost open region (an account, or an item
// being charged) have already charged elsewhere; the innermost region subtracts it from its own.
thread_local double nested_seconds = 0;

// A region (an account, or an item being charged) opens on a thread and closes there in stack
// order; closing returns its own CPU time, without what regions nested in it charged.
void OpenRegion(double* start, double* outer_nested) {
  *start = ThreadCpuSeconds();
  *outer_nested = nested_seconds;
  nested_seconds = 0;
}

double CloseRegion(double start, double outer_nested) {
  const double elapsed = ThreadCpuSeconds() - start;
  const double own = elapsed - nested_seconds;
  nested_seconds = outer_nested + elapsed;
  return own;
}

struct ChargedItems {
  void (*body)(void* context, int64_t i);
  void* context;
  std::atomic<int64_t>* nanoseconds;
};

void RunChargedItem(void* context, int64_t i) {
  const ChargedItems& items = *static_cast<const ChargedItems*>(context);
  double start = 0, outer_nested = 0;
  OpenRegion(&start, &outer_nested);
  items.body(items.context, i);
  const double own = CloseRegion(start, outer_nested);
  items.nanoseconds->fetch_add(static_cast<int64_t>(own * 1e9), std::memory_order_relaxed);
}

}  // namespace

double ThreadCpuSeconds() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

CpuAccount::CpuAccount(const ParallelFor* inner) : inner_(inner) { OpenRegion(&start_, &outer_nested_); }

CpuAccount::~CpuAccount() { CloseRegion(start_, outer_nested_); }

double CpuAccount::Seconds() const {
  const double own = ThreadCpuSeconds() - start_ - nested_seconds;
  return own + 1e-9 * static_cast<double>(item_nanoseconds_.load(std::memory_order_relaxed));
}

void CpuAccount::ChargingParallelFor::Run(int64_t count, void (*body)(void* context, int64_t i),
                                          void* context) const {
  ChargedItems items{body, context, &account_.item_nanoseconds_};
  account_.inner_->Run(count, &RunChargedItem, &items);
}

}  // namespace chorus

#include "common/holdout.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <utility>

#include "common/message_text.h"
#include "common/rng.h"

namespace chorus {

std::vector<int64_t> AllRows(int64_t n) {
  std::vector<int64_t> rows(static_cast<size_t>(n));
  std::iota(rows.begin(), rows.end(), int64_t{0});
  return rows;
}

StatusOr<Partition> HoldOut(int64_t n, double fraction, uint64_t seed, const std::string& file) {
  const int64_t k = std::max<int64_t>(1, std::llround(fraction * static_cast<double>(n)));
  if (k >= n) {
    const std::string rows = std::to_string(n) + " row" + (n == 1 ? "" : "s");
    return Status::InvalidInput(file + ": expected enough rows to hold out validation fraction " +
                                NumberText(fraction) + " and keep some, found " + rows);
  }
  std::vector<int64_t> order = AllRows(n);
  Philox rng(Derive(seed, "validation"));
  for (int64_t i = n - 1; i > 0; --i) {
    std::swap(order[i], order[rng.NextBelow(static_cast<uint64_t>(i) + 1)]);
  }
  Partition p;
  p.validation.assign(order.begin(), order.begin() + k);
  p.train.assign(order.begin() + k, order.end());
  std::sort(p.validation.begin(), p.validation.end());
  std::sort(p.train.begin(), p.train.end());
  return p;
}

}  // namespace chorus

// Which training rows a run holds out for validation: a seeded shuffle, so the same seed always
// holds out the same rows. Row indices are 0-based positions in the training file's rows.
// Thread safety: reentrant free functions.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/status.h"

namespace chorus {

// 0, 1, ..., n-1: every row, in file order.
std::vector<int64_t> AllRows(int64_t n);

struct Partition {
  std::vector<int64_t> train, validation;
};

// Fisher-Yates shuffle of 0..n-1 with Philox(Derive(seed, "validation")); the first
// max(1, round(fraction * n)) become validation. Both parts come back in ascending order.
// Errors (kInvalidInput, "FILE: ..."): no train row would be left.
StatusOr<Partition> HoldOut(int64_t n, double fraction, uint64_t seed, const std::string& file);

}  // namespace chorus

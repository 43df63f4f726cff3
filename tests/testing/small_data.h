// Small three-class data for tests that train real members quickly: 4 standard-normal features,
// the label from a fixed linear rule plus noise; 150 train, 40 validation and 30 test rows.
// Thread safety: pure function.
#pragma once

#include <cstdint>

#include "common/member_training.h"
#include "common/prepared_data.h"

namespace chorus::testing {

// The same seed gives the same data; the hash is a fixed placeholder.
PreparedData SmallClassificationData(uint64_t seed);

// A member quick to train on that data: one hidden layer of 8 units, SGD at rate 0.05, no early
// stopping; seed Derive(run_seed, index).
MemberSpec SmallMemberSpec(int index, uint64_t run_seed, int epochs, int batch_size);

}  // namespace chorus::testing

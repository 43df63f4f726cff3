// An estimate, made before any training, of the memory a run needs on the machine that runs
// `chorus run`, so that a config the machine cannot hold is refused up front instead of failing
// hours later. Counted (bytes, 4 per float):
//   training: per member training at once on this machine, P x (6 + parts + basin vectors)
//     floats (parameters, momentum, one gradient per part, the best epoch's copy, a drawn sample,
//     the result's copy; basin: 4 for gaussian_diag, 2 x (rank + 2) for gaussian_lowrank), plus
//     the minibatch activations, batch x (sum of layer widths) x 4 floats;
//   results: every member's result held for assembly and the bundle: P x (1 + basin vectors / 2)
//     floats and samples x (validation + test rows) x outputs floats of outputs;
//   data: every split's features, twice (the prepared data and its encoding for workers).
// P is the largest network the config can train (the search grid's widest hidden layers).
// It is an estimate: allocator overhead, libraries and the report come on top (typically tens of
// MiB). Thread safety: pure functions.
#pragma once

#include <cstdint>
#include <string>

#include "common/config.h"
#include "common/prepared_data.h"

namespace chorus {

struct MemoryEstimate {
  int members_at_once = 0;     // members training on this machine at the same time
  int64_t parameters = 0;      // P
  int64_t training_bytes = 0;  // all members training at once
  int64_t results_bytes = 0;
  int64_t data_bytes = 0;
  int64_t Total() const { return training_bytes + results_bytes + data_bytes; }
  // "12.3 GiB: training 8.0 GiB (4 members at once, 1.2e+08 parameters each), results ..., data ..."
  std::string Breakdown() const;
};

// members_at_once: how many members train on this machine at once (0 when they all train on
// remote workers).
MemoryEstimate EstimateRunMemory(const Config& config, const PreparedData& data, int members_at_once);

// "1.5 GiB", "320.0 MiB", "12.0 KiB", "512 B".
std::string ByteText(int64_t bytes);

}  // namespace chorus

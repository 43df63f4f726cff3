// `chorus reference RUN_DIR`: for a small classification run, a full-batch HMC reference
// posterior (common/hmc_reference.h) on the run's own training rows and network, and how close
// the run's predictives come to it on the test rows: top-1 agreement and mean total variation
// (Izmailov et al., ICML 2021), beside each one's test NLL and accuracy. The predictives: the
// ensemble as its bundle predicts (weights, samples, temperature), the members' points averaged
// at T = 1, and member 0's point alone at T = 1. A member's point is its trained weights, or with
// a Gaussian basin fit (diagonal, low-rank) the fit's mean. Chain c starts at member c mod M's
// point. Writes RUN_DIR/hmc_reference.json atomically, rewrites report.json and report.html
// with it (coordinator/report_files.h), and prints a table. Thread safety: call from one thread.
#pragma once

#include <cstdint>
#include <string>

namespace chorus {

struct ReferenceOptions {
  std::string run_dir;
  int chains = 4;             // chain c starts at member c mod M's point
  int warmup = 500;           // iterations tuning the step size (dual averaging), then discarded
  int draws = 1000;           // iterations kept per chain before thinning
  int thinning = 2;
  double prior_variance = 0;  // 0: 1 / (training rows x train.optimizer.weight_decay)
  double trajectory_length = 0;  // 0: (pi / 2) x prior standard deviation
  uint64_t seed = 0;
  int threads = 0;            // chains sampled at once; 0 = all cores
  int64_t max_parameters = 10000;
};

// Exit codes as every command: 0 done, 1 internal failure, 2 bad input (no such run, a
// regression run, a network above max_parameters, data that changed since the run, no weight
// decay to set the prior from).
int ReferenceCommand(const ReferenceOptions& options);

}  // namespace chorus

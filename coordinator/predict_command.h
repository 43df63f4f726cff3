// `chorus predict BUNDLE INPUT -o OUTPUT.csv`: the ensemble's predictive, with its uncertainty,
// for every row of INPUT (CSV, or an IDX images file), streamed in batches so memory stays
// bounded whatever the input's size. Output columns: coordinator/prediction_csv.h.
// Thread safety: call from one thread; it runs its own oneTBB arena.
#pragma once

#include <string>

namespace chorus {

struct PredictOptions {
  std::string bundle_path;
  std::string input_path;
  std::string output_path;
  std::string format = "auto";  // auto | csv | idx
  bool skip_bad_rows = false;   // report invalid rows and go on, instead of stopping
  // Rows far outside the training data (common/training_ranges.h) are always counted and
  // reported; with this, any such row stops the command instead (exit 2, nothing written).
  bool refuse_out_of_range = false;
  int threads = 0;              // 0 = all cores; speed only, the output is the same
};

// Returns the exit code: 0 success; 2 bad input (corrupt bundle, unreadable input, a missing
// column, an invalid row without skip_bad_rows, a row far outside the training data with
// refuse_out_of_range); 1 internal failure. OUTPUT appears only on success (temp file +
// rename). Invalid rows, each batch's rows outside the training ranges and a summary go to
// stderr (common/log_format.h).
int PredictCommand(const PredictOptions& options);

}  // namespace chorus

// The CSV that `chorus predict` writes: one row per input row that passed validation, in input
// order. Numbers are written in the shortest form that reads back as the same double, so the
// file carries the predictive exactly.
//   classification: ID, predicted, p_<class>..., confidence, total_entropy, epistemic
//   regression:     ID, mean, total_std, epistemic_std, q05, q95
// ID is "line" (the CSV line the input record starts on) or "index" (the IDX row, from 0).
// Entropies are in nats; regression values in the target's units.
// Thread safety: a PredictionCsv is immutable and may be shared between threads.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/config.h"
#include "common/predictor.h"

namespace chorus {

class PredictionCsv {
 public:
  // class_names: classification only, in output order.
  PredictionCsv(Task task, std::vector<std::string> class_names, std::string id_name);

  // The header line, '\n'-terminated.
  std::string Header() const;

  // One '\n'-terminated line per row of `p` (the task's half), ids[i] in the first column.
  std::string Rows(const std::vector<int64_t>& ids, const Prediction& p) const;

 private:
  Task task_;
  std::vector<std::string> class_names_;
  std::string id_name_;
};

}  // namespace chorus

// The guard data of `chorus promote`: labelled rows on which the candidate and the current bundle
// are both scored for the gate (coordinator/gate.h). By default the candidate run's own test
// split, re-loaded from the run's config.yaml with the loader the run used (LoadPreparedData);
// or a file the operator names, read with the same config (its train split fixes the label set).
// Each bundle encodes the raw rows with its own preprocessing (common/prediction_input.h), so
// bundles trained on different data are compared fairly, and the candidate's scores on its own
// test split equal its report's.
// Thread safety: GuardData is immutable once loaded; ScoreOnGuard is reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/bundle.h"
#include "common/config.h"
#include "common/status.h"
#include "coordinator/gate.h"

namespace chorus {

// Where the guard rows come from; both empty = the config's test split.
struct GuardSource {
  std::string file;    // csv: a labelled CSV with the config's columns; idx: the images file
  std::string labels;  // idx only: the labels file
};

struct GuardData {
  Task task = Task::kClassification;
  std::string format;  // "csv" or "idx"
  std::string input;   // the file whose rows are encoded (csv file, or idx images)
  std::string source;  // for people: the file(s) the rows and labels came from
  int64_t rows = 0;    // the first `rows` valid rows of `input` are the guard rows
  std::vector<std::string> class_names;  // classification: what `labels` index
  std::vector<int32_t> labels;           // classification, one per row
  std::vector<double> targets;           // regression, one per row, target units
  std::string data_hash;  // PreparedData::hash of the data loaded with the guard as test split
  int ece_bins = 15;      // the config's report.ece_bins
};

// Loads the guard rows with `config` (a run's resolved config.yaml). Errors (kInvalidInput, with
// file and line): unreadable or invalid data, a label never seen in the train split, `labels`
// given for csv or missing for idx.
StatusOr<GuardData> LoadGuardData(const Config& config, const GuardSource& source);

// The bundle's calibrated predictive on the guard rows, scored with common/metrics.h. Classes are
// matched by name: a guard label the bundle does not know has probability 0 (ScoreClassification
// floors it), a bundle class the guard lacks counts as a wrong answer when predicted.
// threads: 0 = all cores; speed only. Errors (kInvalidInput): the bundle's task differs from the
// guard's, the bundle fails CheckBundle, the guard file lacks a column the bundle needs, has an
// invalid row or too few rows.
StatusOr<GateMetrics> ScoreOnGuard(const Bundle& bundle, const GuardData& guard, int threads);

}  // namespace chorus

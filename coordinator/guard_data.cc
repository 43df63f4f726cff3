#include "coordinator/guard_data.h"

#include <tbb/parallel_for.h>
#include <tbb/task_arena.h>

#include <algorithm>
#include <memory>
#include <utility>

#include "common/dataset.h"
#include "common/metrics.h"
#include "common/prediction_input.h"
#include "common/predictor.h"
#include "execution/tbb_parallel_for.h"

namespace chorus {
namespace {

// The data config with the guard file(s) in place of the test split.
StatusOr<DataConfig> GuardDataConfig(DataConfig data, const GuardSource& source) {
  if (source.file.empty()) {
    if (!source.labels.empty()) return Status::InvalidInput("--guard-labels needs --guard");
    return data;
  }
  if (data.format == "csv") {
    if (!source.labels.empty()) {
      return Status::InvalidInput("--guard-labels is for idx data; this run's data is csv");
    }
    data.test = source.file;
  } else {
    if (source.labels.empty()) {
      return Status::InvalidInput("--guard " + source.file + ": idx data needs --guard-labels");
    }
    data.test_idx = {source.file, source.labels};
  }
  data.max_test_rows = 0;
  data.true_probabilities.clear();
  data.shift_test.clear();
  return data;
}

// A whole split's predictive, filled a batch at a time.
struct Collected {
  MatrixD probabilities;    // classification: rows x guard classes (+ classes only the bundle has)
  GaussianMixture mixture;  // regression
  int64_t filled = 0;
};

// For each bundle class, its column in the guard's class order; classes the guard lacks get new
// columns after the guard's. *columns is the total.
std::vector<int64_t> ClassColumns(const Bundle& bundle, const GuardData& guard, int64_t* columns) {
  std::vector<int64_t> column_of;
  *columns = static_cast<int64_t>(guard.class_names.size());
  for (const std::string& name : bundle.class_names) {
    const auto it = std::find(guard.class_names.begin(), guard.class_names.end(), name);
    column_of.push_back(it != guard.class_names.end() ? it - guard.class_names.begin()
                                                      : (*columns)++);
  }
  return column_of;
}

void Append(Task task, const Prediction& p, int64_t rows, const std::vector<int64_t>& column_of,
            Collected* c) {
  if (task == Task::kClassification) {
    const MatrixD& probs = p.classification.probabilities;
    for (int64_t i = 0; i < rows; ++i) {
      for (int64_t k = 0; k < probs.cols(); ++k) {
        c->probabilities(c->filled + i, column_of[k]) = probs(i, k);
      }
    }
  } else {
    const GaussianMixture& m = p.regression.mixture;
    c->mixture.mean.middleRows(c->filled, rows) = m.mean.topRows(rows);
    c->mixture.stddev.middleRows(c->filled, rows) = m.stddev.topRows(rows);
    c->mixture.weights = m.weights;
  }
  c->filled += rows;
}

// One batch's predictive, its components computed on the arena's threads.
Prediction PredictBatch(const Predictor& predictor, const Matrix& x, tbb::task_arena& arena) {
  std::vector<Matrix> outputs(static_cast<size_t>(predictor.Components()));
  arena.execute([&] {
    tbb::parallel_for(int64_t{0}, predictor.Components(), [&](int64_t c) {
      outputs[static_cast<size_t>(c)] = predictor.ComponentOutputs(c, x);
    });
  });
  return predictor.Combine(outputs);
}

// Reads the guard rows in the run's batch positions (kBatchRows from row 0) and collects the
// predictive of each.
Status CollectPredictions(const Predictor& predictor, const Bundle& bundle, const GuardData& guard,
                          tbb::task_arena& arena, Collected* c) {
  const InputFormat format = guard.format == "idx" ? InputFormat::kIdx : InputFormat::kCsv;
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<InputReader> reader,
                          InputReader::Open(guard.input, format, bundle.preprocessing));
  int64_t columns = 0;
  const std::vector<int64_t> column_of = ClassColumns(bundle, guard, &columns);
  if (guard.task == Task::kClassification) {
    c->probabilities = MatrixD::Zero(guard.rows, columns);
  } else {
    c->mixture.mean.resize(guard.rows, predictor.Components());
    c->mixture.stddev.resize(guard.rows, predictor.Components());
  }
  const BadRowFn stop = [](const Status& problem) { return problem; };
  InputBatch batch;
  while (c->filled < guard.rows) {
    const int64_t want = std::min(Predictor::kBatchRows, guard.rows - c->filled);
    CHORUS_ASSIGN_OR_RETURN(const bool more, reader->Next(want, stop, &batch));
    if (!more) break;
    Append(guard.task, PredictBatch(predictor, batch.x, arena), batch.x.rows(), column_of, c);
  }
  if (c->filled < guard.rows) {
    return Status::InvalidInput(guard.input + ": " + std::to_string(c->filled) +
                                " valid rows, the guard needs " + std::to_string(guard.rows));
  }
  return Status::Ok();
}

}  // namespace

StatusOr<GuardData> LoadGuardData(const Config& config, const GuardSource& source) {
  CHORUS_ASSIGN_OR_RETURN(const DataConfig data, GuardDataConfig(config.data, source));
  CHORUS_ASSIGN_OR_RETURN(const PreparedData prepared, LoadPreparedData(data, config.run.seed));
  GuardData g;
  g.task = prepared.task;
  g.format = data.format;
  g.input = data.format == "csv" ? data.test : data.test_idx.images;
  g.source = data.format == "csv" ? data.test : data.test_idx.images + " + " + data.test_idx.labels;
  g.rows = prepared.test.rows();
  g.class_names = prepared.class_names;
  g.labels = prepared.test.labels;
  for (const float t : prepared.test.targets) {
    g.targets.push_back(static_cast<double>(t) * prepared.target_scale + prepared.target_mean);
  }
  g.data_hash = prepared.hash;
  g.ece_bins = config.report.ece_bins;
  return g;
}

StatusOr<GateMetrics> ScoreOnGuard(const Bundle& bundle, const GuardData& guard, int threads) {
  if (bundle.task != guard.task) {
    return Status::InvalidInput(std::string("the bundle is ") + TaskName(bundle.task) +
                                ", the guard data " + TaskName(guard.task));
  }
  tbb::task_arena arena(threads > 0 ? threads : tbb::task_arena::automatic);
  const TbbParallelFor parallel;  // samples drawn on the arena's threads
  StatusOr<Predictor> created = Status::Internal("not created");
  arena.execute([&] { created = Predictor::Create(bundle, &parallel); });
  CHORUS_ASSIGN_OR_RETURN(const Predictor predictor, std::move(created));
  Collected c;
  CHORUS_RETURN_IF_ERROR(CollectPredictions(predictor, bundle, guard, arena, &c));
  GateMetrics m;
  if (guard.task == Task::kClassification) {
    const ClassificationMetrics s =
        ScoreClassification(c.probabilities, guard.labels, guard.ece_bins);
    m.nll = s.nll;
    m.accuracy = s.accuracy;
    m.ece = s.ece;
  } else {
    const RegressionMetrics s = ScoreRegression(c.mixture, guard.targets);
    m.nll = s.nll;
    m.rmse = s.rmse;
    m.coverage_90 = s.coverage_90;
  }
  return m;
}

}  // namespace chorus

#include "coordinator/shift_evaluation.h"

#include <memory>

#include "common/evaluation.h"
#include "common/prediction_input.h"
#include "coordinator/bundle_writer.h"

namespace chorus {
namespace {

constexpr int64_t kReadBatchRows = 4096;

// One predictive's components on the test rows and on the shifted rows, with their weights.
struct Components {
  std::vector<const Matrix*> test, shifted;
  std::vector<double> weights;
};

// Every member's network outputs on the shifted rows: its trained point, then its samples in
// seed order (the point alone when it has no basin fit).
struct ShiftedOutputs {
  std::vector<Matrix> points;
  std::vector<std::vector<Matrix>> samples;
};

ShiftedOutputs PredictShifted(const Config& config, const PreparedData& data,
                              const std::vector<MemberResult>& members, const Matrix& shifted) {
  const Mlp net = NetworkFor(config.model, data);
  ShiftedOutputs out;
  std::vector<float> w(net.ParameterCount());
  for (const MemberResult& m : members) {
    out.points.push_back(PredictOutputs(net, m.parameters.data(), shifted));
    out.samples.emplace_back();
    for (uint64_t seed : m.sample_seeds) {
      DrawBasinSample(m.basin, seed, config.ensemble.basin.scale, w.data());
      out.samples.back().push_back(PredictOutputs(net, w.data(), shifted));
    }
  }
  return out;
}

ShiftDetection Score(const PreparedData& data, const char* name, const Components& c, double temperature) {
  ShiftDetection d{name, static_cast<int>(c.test.size()), temperature, {}};
  if (data.task == Task::kClassification) {
    d.aurocs = ClassificationShiftAurocs(c.test, c.shifted, c.weights, temperature);
    return d;
  }
  std::vector<MemberGaussian> test, shifted;
  for (size_t i = 0; i < c.test.size(); ++i) {
    test.push_back(ToGaussian(*c.test[i], data));
    shifted.push_back(ToGaussian(*c.shifted[i], data));
  }
  std::vector<const MemberGaussian*> tp, sp;
  for (size_t i = 0; i < test.size(); ++i) tp.push_back(&test[i]), sp.push_back(&shifted[i]);
  d.aurocs = RegressionShiftAurocs(tp, sp, c.weights, temperature);
  return d;
}

}  // namespace

StatusOr<Matrix> LoadShiftedRows(const DataConfig& config, const PreparedData& data) {
  const Preprocessing preprocessing = RunPreprocessing(config, data);
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<InputReader> reader,
                          InputReader::Open(config.shift_test, InputFormat::kAuto, preprocessing));
  const BadRowFn refuse = [](const Status& problem) { return problem; };
  std::vector<Matrix> batches;
  int64_t rows = 0;
  const int64_t limit = config.max_test_rows > 0 ? config.max_test_rows : INT64_MAX;
  InputBatch batch;
  while (rows < limit) {
    CHORUS_ASSIGN_OR_RETURN(const bool more, reader->Next(std::min(kReadBatchRows, limit - rows), refuse, &batch));
    if (!more) break;
    rows += batch.x.rows();
    batches.push_back(std::move(batch.x));
  }
  if (rows == 0) return Status::InvalidInput(config.shift_test + ": data.shift_test has no rows");
  Matrix x(rows, data.features());
  int64_t at = 0;
  for (const Matrix& b : batches) {
    x.middleRows(at, b.rows()) = b;
    at += b.rows();
  }
  return x;
}

ShiftEvaluation EvaluateShift(const Config& config, const PreparedData& data,
                              const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                              const Matrix& shifted) {
  const ShiftedOutputs outputs = PredictShifted(config, data, members, shifted);
  ShiftEvaluation e{config.data.shift_test, shifted.rows(), data.test.rows(), {}};
  e.predictives.push_back(
      Score(data, "one member", {{&members[0].test_outputs}, {&outputs.points[0]}, {1.0}}, 1.0));
  if (config.ensemble.basin.method != BasinMethod::kNone) {
    Components points;
    for (size_t m = 0; m < members.size(); ++m) {
      points.test.push_back(&members[m].test_outputs);
      points.shifted.push_back(&outputs.points[m]);
    }
    points.weights = ev.weights;
    e.predictives.push_back(Score(data, "members' trained points", points, 1.0));
  }
  Components ensemble;
  for (size_t m = 0; m < members.size(); ++m) {
    const std::vector<const Matrix*> test = members[m].TestSamples();
    const bool has_samples = !outputs.samples[m].empty();
    for (size_t s = 0; s < test.size(); ++s) {
      ensemble.test.push_back(test[s]);
      ensemble.shifted.push_back(has_samples ? &outputs.samples[m][s] : &outputs.points[m]);
      ensemble.weights.push_back(ev.weights[m] / static_cast<double>(test.size()));
    }
  }
  e.predictives.push_back(Score(data, "ensemble", ensemble, ev.temperature));
  return e;
}

}  // namespace chorus

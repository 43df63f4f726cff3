#include "tests/testing/small_data.h"

#include <string>

#include "common/rng.h"

namespace chorus::testing {
namespace {

Split NoisyLinearSplit(Philox& rng, int64_t rows) {
  Split s;
  s.x.resize(rows, 4);
  for (int64_t i = 0; i < rows; ++i) {
    for (int j = 0; j < 4; ++j) s.x(i, j) = static_cast<float>(rng.NextNormal());
    const double score = s.x(i, 0) - 0.5 * s.x(i, 1) + 0.5 * rng.NextNormal();
    s.labels.push_back(score < -0.5 ? 0 : score < 0.5 ? 1 : 2);
    s.origin.push_back("row " + std::to_string(i));
  }
  return s;
}

}  // namespace

PreparedData SmallClassificationData(uint64_t seed) {
  Philox rng(seed);
  PreparedData d;
  d.task = Task::kClassification;
  d.class_names = {"a", "b", "c"};
  d.feature_names = {"x0", "x1", "x2", "x3"};
  d.train = NoisyLinearSplit(rng, 150);
  d.validation = NoisyLinearSplit(rng, 40);
  d.test = NoisyLinearSplit(rng, 30);
  d.hash = std::string(64, 'f');
  return d;
}

MemberSpec SmallMemberSpec(int index, uint64_t run_seed, int epochs, int batch_size) {
  MemberSpec spec;
  spec.index = index;
  spec.seed = Derive(run_seed, static_cast<uint64_t>(index));
  spec.model.hidden = {8};
  spec.train.epochs = epochs;
  spec.train.batch_size = batch_size;
  spec.train.optimizer.lr = 0.05;
  spec.train.early_stopping.mode = Switch::kOff;
  return spec;
}

}  // namespace chorus::testing

// What TrainMember (common/member_training.h) does with settings at the edge of the data.
#include "common/member_training.h"

#include <gtest/gtest.h>
#include <sys/resource.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "common/heads.h"
#include "common/last_layer_laplace.h"
#include "common/rng.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace member_training_test {

MemberSpec SpecWithBatch(int batch_size) { return testing::SmallMemberSpec(0, 13, 3, batch_size); }

// A deliberate choice: a batch larger than the training rows is not an error; it is clamped to
// the row count (one full-batch step per epoch), so it trains exactly like batch_size = rows.
TEST(MemberTrainingTest, BatchLargerThanTheTrainingRowsIsClampedToTheRowCount) {
  const PreparedData d = testing::SmallClassificationData(8);
  ASSERT_EQ(d.train.rows(), 150);
  const StatusOr<MemberResult> huge = TrainMember(SpecWithBatch(100000), d, nullptr);
  ASSERT_TRUE(huge.ok()) << huge.status().ToString();
  const StatusOr<MemberResult> rows = TrainMember(SpecWithBatch(150), d, nullptr);
  ASSERT_TRUE(rows.ok()) << rows.status().ToString();
  EXPECT_EQ(huge.value().epoch_loss.size(), 3u);
  EXPECT_EQ(huge.value().parameters, rows.value().parameters);
  EXPECT_EQ(huge.value().epoch_loss, rows.value().epoch_loss);
  EXPECT_TRUE(huge.value().test_outputs == rows.value().test_outputs);
  // The comparison can tell batch sizes apart: a smaller batch takes other steps.
  const StatusOr<MemberResult> smaller = TrainMember(SpecWithBatch(149), d, nullptr);
  ASSERT_TRUE(smaller.ok()) << smaller.status().ToString();
  EXPECT_NE(smaller.value().parameters, rows.value().parameters);
}

// basin.method laplace_last_layer: the member trains as without a basin fit, then its samples
// differ from the trained point in the last layer only (common/last_layer_laplace.h), the prior
// precision is a point of the tuning grid, each sample's outputs are those of its redrawn weights,
// and the whole result is a pure function of the spec.
TEST(MemberTrainingTest, LaplaceSamplesVaryOnlyTheLastLayer) {
  const PreparedData d = testing::SmallClassificationData(8);
  MemberSpec spec = testing::SmallMemberSpec(0, 13, 3, 32);
  const StatusOr<MemberResult> plain = TrainMember(spec, d, nullptr);
  spec.basin.method = BasinMethod::kLaplaceLastLayer;
  spec.basin.samples = 4;
  const StatusOr<MemberResult> a = TrainMember(spec, d, nullptr), b = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(plain.ok() && a.ok() && b.ok()) << a.status().ToString();
  const MemberResult& r = a.value();
  EXPECT_EQ(r.parameters, plain.value().parameters);
  EXPECT_EQ(r.epoch_loss.size(), 3u);  // no extra epochs
  EXPECT_EQ(r.basin.method, BasinMethod::kLaplaceLastLayer);
  EXPECT_EQ(r.basin.laplace.form, LaplaceForm::kFull);  // (8 + 1) x 3 weights: exact
  const std::vector<double> grid = PriorPrecisionGrid();
  EXPECT_NE(std::find(grid.begin(), grid.end(), r.basin.laplace.prior_precision), grid.end());
  ASSERT_EQ(r.sample_seeds.size(), 4u);
  const Mlp net = NetworkFor(spec.model, d);
  const int64_t last_layer = (8 + 1) * 3, below = net.ParameterCount() - last_layer;
  std::vector<float> w(net.ParameterCount());
  for (size_t s = 0; s < r.sample_seeds.size(); ++s) {
    DrawBasinSample(r.basin, r.sample_seeds[s], 1.0, w.data());
    EXPECT_TRUE(std::equal(w.begin(), w.begin() + below, r.parameters.begin())) << "sample " << s;
    EXPECT_FALSE(std::equal(w.begin() + below, w.end(), r.parameters.begin() + below)) << "sample " << s;
    EXPECT_TRUE(PredictOutputs(net, w.data(), d.test.x) == r.sample_test_outputs[s]) << "sample " << s;
  }
  EXPECT_EQ(r.basin.laplace.eigenvectors, b.value().basin.laplace.eigenvectors);
  for (size_t s = 0; s < r.sample_test_outputs.size(); ++s) {
    EXPECT_TRUE(r.sample_test_outputs[s] == b.value().sample_test_outputs[s]) << "sample " << s;
  }
  // A configured prior precision is kept as given.
  spec.basin.prior_precision = 3.5;
  const StatusOr<MemberResult> fixed = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(fixed.ok());
  EXPECT_EQ(fixed.value().basin.laplace.prior_precision, 3.5);
}

// Without validation rows (a member of a cross-fitted run), `prior_precision: tune` picks the grid
// value of largest Laplace evidence on the training rows (MacKay 1992), here recomputed from the
// trained network's own outputs, so the member trains instead of failing.
TEST(MemberTrainingTest, LaplaceWithoutValidationRowsTunesThePriorByEvidence) {
  PreparedData d = testing::SmallClassificationData(8);
  d.validation = Split{};
  MemberSpec spec = testing::SmallMemberSpec(0, 13, 3, 32);
  spec.basin.method = BasinMethod::kLaplaceLastLayer;
  spec.basin.samples = 2;
  const StatusOr<MemberResult> r = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  LastLayerLaplace la = ToLastLayerLaplace(r.value().basin);
  const Mlp net = NetworkFor(spec.model, d);
  const double train_nll_sum =
      SoftmaxCrossEntropyValue(PredictOutputs(net, r.value().parameters.data(), d.train.x), d.train.labels.data()) *
      static_cast<double>(d.train.rows());
  const double chosen = la.prior_precision;
  const double chosen_evidence = LaplaceLogEvidence(la, train_nll_sum);
  for (double prior : PriorPrecisionGrid()) {
    la.prior_precision = prior;
    // float logits against the fit's double ones: 1e-6 relative covers the rounding.
    EXPECT_LE(LaplaceLogEvidence(la, train_nll_sum), chosen_evidence + 1e-6 * std::abs(chosen_evidence))
        << "prior " << prior << " beats the chosen " << chosen;
  }
}

// basin.method cyclical_sgmcmc: cycles x samples_per_cycle samples, each the weights at a sample
// step, whose outputs the result carries; the same spec gives the same bits; with the posterior
// temperature 0 (no noise) SGLD is plain SGD under the cyclical schedule, so the noise is what
// makes the samples of a run at temperature 1 differ from those of the noiseless run.
TEST(MemberTrainingTest, CyclicalSgmcmcCollectsSamplesAtTheSampleSteps) {
  const PreparedData d = testing::SmallClassificationData(9);
  MemberSpec spec = testing::SmallMemberSpec(0, 21, 8, 30);  // 150 rows: 5 steps an epoch, 40 steps
  spec.basin.method = BasinMethod::kCyclicalSgmcmc;
  spec.basin.sgmcmc = {SgmcmcSampler::kSgld, 4, 0.5, 2, 1.0, 0.1};
  const StatusOr<MemberResult> a = TrainMember(spec, d, nullptr), b = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(a.ok() && b.ok()) << a.status().ToString();
  const MemberResult& r = a.value();
  EXPECT_EQ(r.epoch_loss.size(), 8u);
  ASSERT_EQ(r.basin.samples.rows(), 8);
  ASSERT_EQ(r.sample_seeds, (std::vector<uint64_t>{0, 1, 2, 3, 4, 5, 6, 7}));
  const Mlp net = NetworkFor(spec.model, d);
  std::vector<float> w(net.ParameterCount());
  for (int s = 0; s < 8; ++s) {
    DrawBasinSample(r.basin, static_cast<uint64_t>(s), 1.0, w.data());
    EXPECT_TRUE(PredictOutputs(net, w.data(), d.test.x) == r.sample_test_outputs[s]) << "sample " << s;
    if (s > 0) {
      EXPECT_FALSE(r.basin.samples.row(s) == r.basin.samples.row(s - 1)) << "sample " << s;
    }
  }
  // The last sample is the last step's weights.
  EXPECT_TRUE(std::equal(r.parameters.begin(), r.parameters.end(), r.basin.samples.row(7).data()));
  EXPECT_TRUE(r.basin.samples == b.value().basin.samples);
  spec.basin.sgmcmc.temperature = 0;
  const StatusOr<MemberResult> cold = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(cold.ok());
  EXPECT_FALSE(cold.value().basin.samples == r.basin.samples);
  // More cycles than steps is refused with the place.
  spec.basin.sgmcmc.cycles = 41;
  const StatusOr<MemberResult> refused = TrainMember(spec, d, nullptr);
  ASSERT_FALSE(refused.ok());
  EXPECT_NE(refused.status().message().find("cyclical_sgmcmc over 40 steps"), std::string::npos)
      << refused.status().ToString();
}

// CPU-seconds by phase (common/cpu_account.h): training always costs something; a member without
// a basin fit records no fit and no samples; a low-rank fit records both. Together they are at most
// the CPU time the call took, measured by getrusage(RUSAGE_THREAD) (Linux getrusage(2)): with no
// ParallelFor everything runs on this thread.
TEST(MemberTrainingTest, RecordsCpuSecondsOfEachPhase) {
  const auto thread_seconds = [] {
    rusage u{};
    getrusage(RUSAGE_THREAD, &u);
    return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
           1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
  };
  const PreparedData d = testing::SmallClassificationData(8);
  MemberSpec spec = testing::SmallMemberSpec(0, 13, 3, 32);
  const StatusOr<MemberResult> plain = TrainMember(spec, d, nullptr);
  ASSERT_TRUE(plain.ok());
  EXPECT_GT(plain.value().cpu_seconds.training, 0);
  EXPECT_EQ(plain.value().cpu_seconds.basin_fit, 0);
  EXPECT_EQ(plain.value().cpu_seconds.samples, 0);
  spec.basin.method = BasinMethod::kGaussianLowRank;
  spec.basin.epochs = 2;
  spec.basin.snapshots = 4;
  spec.basin.rank = 2;
  spec.basin.samples = 3;
  const double before = thread_seconds();
  const StatusOr<MemberResult> fitted = TrainMember(spec, d, nullptr);
  const double spent = thread_seconds() - before;
  ASSERT_TRUE(fitted.ok());
  const MemberResult::CpuSeconds& cpu = fitted.value().cpu_seconds;
  EXPECT_GT(cpu.training, 0);
  EXPECT_GT(cpu.basin_fit, 0);
  EXPECT_GT(cpu.samples, 0);
  EXPECT_LE(cpu.training + cpu.basin_fit + cpu.samples, spent + 0.001);
}

}  // namespace member_training_test
}  // namespace chorus

// The probit predictive of last-layer Laplace members (common/laplace_probit.h) against Monte
// Carlo over the very samples the ensemble draws (DrawBasinSample), on a trained small network.
#include "common/laplace_probit.h"

#include <gtest/gtest.h>

#include <vector>

#include "common/heads.h"
#include "common/member_training.h"
#include "tests/testing/small_data.h"

namespace chorus {
namespace laplace_probit_test {

struct LaplaceMember {
  PreparedData data = testing::SmallClassificationData(8);
  MemberSpec spec = testing::SmallMemberSpec(0, 13, 3, 32);
  MemberResult result;
  Mlp net = NetworkFor(spec.model, data);
  LaplaceMember() {
    spec.basin.method = BasinMethod::kLaplaceLastLayer;
    spec.basin.samples = 2;
    StatusOr<MemberResult> r = TrainMember(spec, data, nullptr);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    if (r.ok()) result = std::move(r).value();
  }
};

// MacKay's probit approximation is not exact (see LastLayerLaplaceTest's multiclass check), but
// it must track E[softmax(f)] over the fit's Gaussian better than the plug-in softmax of the
// trained point does. With the tuned prior the posterior is narrow, so the covariance is inflated
// (scale 100) until the two differ clearly from Monte Carlo noise (4000 draws). Measured ratios of
// the errors: 0.72 at scale 3, 0.56 at 30, below 0.5 at 100; 0.7 is the multiclass check's bound.
// (With a weak prior, precision 0.05, the probit is worse than the plug-in, 0.099 against 0.033:
// it ignores the logits' covariance, and softmax's shift-invariant direction, left to the prior,
// inflates every logit's variance alike. The README says so.)
TEST(LaplaceProbitTest, TracksMonteCarloOverTheDrawnSamplesBetterThanThePlugIn) {
  const LaplaceMember m;
  constexpr double kScale = 100;
  const StatusOr<MatrixD> probit = LaplaceProbitPredictive(m.net, m.result.basin, kScale, m.data.test.x);
  ASSERT_TRUE(probit.ok()) << probit.status().ToString();
  const MatrixD plug_in = Softmax(m.result.test_outputs);
  MatrixD mc = MatrixD::Zero(plug_in.rows(), plug_in.cols());
  std::vector<float> w(static_cast<size_t>(m.net.ParameterCount()));
  constexpr int kDraws = 4000;
  for (int s = 0; s < kDraws; ++s) {
    DrawBasinSample(m.result.basin, static_cast<uint64_t>(s), kScale, w.data());
    mc += Softmax(PredictOutputs(m.net, w.data(), m.data.test.x)) / kDraws;
  }
  const double probit_error = (probit.value() - mc).cwiseAbs().rowwise().maxCoeff().mean();
  const double plug_in_error = (plug_in - mc).cwiseAbs().rowwise().maxCoeff().mean();
  EXPECT_LT(probit_error, 0.7 * plug_in_error) << probit_error << " vs plug-in " << plug_in_error;
  // A vanishing covariance leaves the plug-in softmax.
  const StatusOr<MatrixD> sharp = LaplaceProbitPredictive(m.net, m.result.basin, 1e-12, m.data.test.x);
  ASSERT_TRUE(sharp.ok());
  EXPECT_LT((sharp.value() - plug_in).cwiseAbs().maxCoeff(), 1e-6);
}

TEST(LaplaceProbitTest, MixtureWeighsMembersAndRefusesOtherFits) {
  const LaplaceMember m;
  const StatusOr<MatrixD> one = LaplaceProbitPredictive(m.net, m.result.basin, 1.0, m.data.test.x);
  ASSERT_TRUE(one.ok());
  BasinFit shifted = m.result.basin;  // a second member: the same fit at another point
  for (float& v : shifted.mean) v *= 0.5f;
  const StatusOr<MatrixD> two = LaplaceProbitPredictive(m.net, shifted, 1.0, m.data.test.x);
  const StatusOr<MatrixD> mix =
      LaplaceProbitMixture(m.net, {&m.result.basin, &shifted}, {0.25, 0.75}, 1.0, m.data.test.x);
  ASSERT_TRUE(two.ok() && mix.ok());
  EXPECT_LT((mix.value() - (0.25 * one.value() + 0.75 * two.value())).cwiseAbs().maxCoeff(), 1e-15);
  EXPECT_LT((mix.value().rowwise().sum().array() - 1.0).abs().maxCoeff(), 1e-12);
  BasinFit plain;
  plain.method = BasinMethod::kNone;
  plain.mean = m.result.parameters;
  EXPECT_FALSE(LaplaceProbitPredictive(m.net, plain, 1.0, m.data.test.x).ok());
  EXPECT_FALSE(LaplaceProbitMixture(m.net, {&m.result.basin}, {0.5, 0.5}, 1.0, m.data.test.x).ok());
}

}  // namespace laplace_probit_test
}  // namespace chorus

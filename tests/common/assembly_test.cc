#include "common/assembly.h"

#include <gtest/gtest.h>
#include <tbb/task_arena.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include "common/rng.h"
#include "common/size_curve.h"
#include "execution/tbb_parallel_for.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace assembly_test {

using testing::MakeTempDir;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

struct ScipyTemperature {
  double log_t = 0, nll = 0;
};

// Runs tests/reference/scipy_temperature.py on uniformly weighted members' logits.
ScipyTemperature ScipyTunedTemperature(const std::vector<const Matrix*>& logits,
                                       const std::vector<int32_t>& labels) {
  const std::string dir = MakeTempDir("chorus-temperature");
  MatrixD label_column(static_cast<Eigen::Index>(labels.size()), 1);
  for (size_t i = 0; i < labels.size(); ++i) label_column(i, 0) = labels[i];
  std::vector<std::string> args = {dir + "/labels.txt"};
  WriteMatrixText(args[0], label_column);
  for (size_t m = 0; m < logits.size(); ++m) {
    args.push_back(dir + "/logits" + std::to_string(m) + ".txt");
    WriteMatrixText(args.back(), logits[m]->cast<double>());
  }
  std::istringstream out(RunReferenceScript("scipy_temperature.py", args));
  ScipyTemperature result;
  std::string name_t, name_nll;
  out >> name_t >> result.log_t >> name_nll >> result.nll;
  EXPECT_EQ(name_t + " " + name_nll, "log_t nll") << "unexpected reference output";
  std::filesystem::remove_all(dir);
  return result;
}

// scale * z with z standard normal, inputs x classes.
Matrix RandomLogits(int rows, int classes, double scale, Philox* rng) {
  Matrix z(rows, classes);
  for (int i = 0; i < rows; ++i)
    for (int k = 0; k < classes; ++k) z(i, k) = static_cast<float>(scale * rng->NextNormal());
  return z;
}

// One label per row drawn from softmax(z_i) by inverting its CDF at a uniform draw.
std::vector<int32_t> SampleLabels(const Matrix& z, Philox* rng) {
  std::vector<int32_t> labels(z.rows());
  for (Eigen::Index i = 0; i < z.rows(); ++i) {
    const Eigen::RowVectorXd x = z.row(i).cast<double>();
    const Eigen::RowVectorXd p = (x.array() - x.maxCoeff()).exp();
    double u = rng->NextUniform() * p.sum();
    int32_t k = 0;
    while (k + 1 < z.cols() && (u -= p(k)) >= 0) ++k;
    labels[i] = k;
  }
  return labels;
}

// Members that share a signal and differ by noise, with labels drawn from the signal.
struct Ensemble {
  std::vector<Matrix> validation, test;
  std::vector<int32_t> validation_labels, test_labels;
  std::vector<const Matrix*> Validation() const { return Pointers(validation); }
  std::vector<const Matrix*> Test() const { return Pointers(test); }
  static std::vector<const Matrix*> Pointers(const std::vector<Matrix>& v) {
    std::vector<const Matrix*> out;
    for (const Matrix& m : v) out.push_back(&m);
    return out;
  }
};

Ensemble RandomEnsemble(int members, int rows, int classes, uint64_t seed) {
  Philox rng(seed);
  Ensemble e;
  const Matrix signal_v = RandomLogits(rows, classes, 2.0, &rng);
  const Matrix signal_t = RandomLogits(rows, classes, 2.0, &rng);
  e.validation_labels = SampleLabels(signal_v, &rng);
  e.test_labels = SampleLabels(signal_t, &rng);
  for (int m = 0; m < members; ++m) {
    e.validation.push_back(signal_v + RandomLogits(rows, classes, 1.5, &rng));
    e.test.push_back(signal_t + RandomLogits(rows, classes, 1.5, &rng));
  }
  return e;
}

MemberGaussian RandomMember(const std::vector<double>& targets, double noise, Philox* rng) {
  MemberGaussian g;
  for (double y : targets) {
    g.mean.push_back(y + noise * rng->NextNormal());
    g.stddev.push_back(0.2 + rng->NextUniform());
  }
  return g;
}

std::vector<double> RandomTargets(int n, Philox* rng) {
  std::vector<double> y(n);
  for (double& v : y) v = 2.0 * rng->NextNormal();
  return y;
}

TEST(AssemblyTest, MixtureProbabilitiesMatchHandSoftmax) {
  const float ln3 = std::log(3.0f);
  // softmax(0, ln 3) = (1/4, 3/4), also for logits (0, 2 ln 3) at T = 2. softmax(1000, 1001) =
  // (1 - sigma(1), sigma(1)), sigma(1) = e / (1 + e) = 0.7310585786300049; exp(1000) overflows
  // unless the row maximum is subtracted first.
  const Matrix a{{0.0f, ln3}, {1000.0f, 1001.0f}}, b{{ln3, 0.0f}, {1001.0f, 1000.0f}};
  const Matrix doubled = 2.0f * a;
  const MatrixD p = MixtureProbabilities({&a}, {1.0}, 1.0);
  EXPECT_NEAR(p(0, 0), 0.25, 1e-7);
  EXPECT_NEAR(p(0, 1), 0.75, 1e-7);
  EXPECT_NEAR(p(1, 0), 1.0 - 0.7310585786300049, 1e-15);
  EXPECT_NEAR(p(1, 1), 0.7310585786300049, 1e-15);
  EXPECT_NEAR(MixtureProbabilities({&doubled}, {1.0}, 2.0)(0, 1), 0.75, 1e-7);
  // 0.25 (1/4, 3/4) + 0.75 (3/4, 1/4) = (0.625, 0.375).
  const MatrixD mix = MixtureProbabilities({&a, &b}, {0.25, 0.75}, 1.0);
  EXPECT_NEAR(mix(0, 0), 0.625, 1e-7);
  EXPECT_NEAR(mix(0, 1), 0.375, 1e-7);
}

TEST(AssemblyTest, MinimiseScalarFindsParabolaVertex) {
  const auto parabola = [](double x) { return (x - 1.234) * (x - 1.234) + 3.0; };
  // f near the vertex differs from 3 by dx^2, so double rounding hides dx below ~3e-8.
  EXPECT_NEAR(MinimiseScalar(parabola, -5.0, 5.0, 21, 1e-9), 1.234, 1e-7);
  // Vertex outside the range: the minimum is the nearer end.
  const auto outside = [](double x) { return (x - 7.0) * (x - 7.0); };
  EXPECT_NEAR(MinimiseScalar(outside, -5.0, 5.0, 21, 1e-9), 5.0, 2e-9);
  EXPECT_NEAR(MinimiseScalar(parabola, 2.0, 3.0, 2, 1e-9), 2.0, 2e-9);
}

TEST(AssemblyTest, TuneTemperatureMatchesScipyOnAnEnsemble) {
  SCOPED_TRACE("seed 31");
  const Ensemble e = RandomEnsemble(3, 400, 6, 31);
  const std::vector<double> weights(3, 1.0 / 3);
  const double t = TuneTemperature(e.Validation(), weights, e.validation_labels);
  const ScipyTemperature ref = ScipyTunedTemperature(e.Validation(), e.validation_labels);
  // SciPy minimize_scalar(method='bounded', xatol=1e-8) on the same validation NLL over log T.
  EXPECT_NEAR(std::log(t), ref.log_t, 1e-5);
  const MatrixD p = MixtureProbabilities(e.Validation(), weights, t);
  EXPECT_NEAR(ScoreClassification(p, e.validation_labels, 10).nll, ref.nll, 1e-10);
}

TEST(AssemblyTest, TuneTemperatureRecoversKnownTemperature) {
  // Labels drawn from softmax(z) and logits T0 z: the NLL-optimal temperature is T0 up to
  // sampling error (standard deviation 0.02 in log T over 20 seeds at 5000 inputs; this seed is
  // off by 0.005), and SciPy must agree with us.
  for (const double t0 : {0.4, 2.5}) {
    SCOPED_TRACE("T0 " + std::to_string(t0) + ", seed 41");
    Philox rng(41);
    const Matrix z = RandomLogits(5000, 5, 2.0, &rng);
    const std::vector<int32_t> labels = SampleLabels(z, &rng);
    const Matrix logits = static_cast<float>(t0) * z;
    const double t = TuneTemperature({&logits}, {1.0}, labels);
    EXPECT_NEAR(std::log(t), std::log(t0), 0.06);
    EXPECT_NEAR(std::log(t), ScipyTunedTemperature({&logits}, labels).log_t, 1e-5);
  }
}

TEST(AssemblyTest, GridTermsChangeNoBitOfTheTunedTemperature) {
  // The size grid tunes every subset with terms precomputed for all members; each tuning must
  // equal the one computed from scratch exactly. Subsets with unequal weights, one zero weight,
  // and a component the terms do not hold (then the tuning computes everything itself).
  const Ensemble e = RandomEnsemble(4, 300, 5, 47);
  const std::vector<const Matrix*> all = e.Validation();
  const TemperatureGridTerms terms({all[0], all[1], all[2]}, e.validation_labels, nullptr);
  EXPECT_NE(terms.Find(all[1], TemperatureGridTerms::kGridPoints - 1), nullptr);
  EXPECT_EQ(terms.Find(all[3], 0), nullptr);
  const std::vector<std::pair<std::vector<const Matrix*>, std::vector<double>>> cases = {
      {{all[0]}, {1.0}},
      {{all[0], all[2]}, {0.5, 0.5}},
      {{all[2], all[1], all[0]}, {0.2, 0.0, 0.8}},
      {{all[1], all[3]}, {0.5, 0.5}},
  };
  for (const auto& c : cases) {
    const double plain = TuneTemperature(c.first, c.second, e.validation_labels);
    EXPECT_EQ(TuneTemperature(c.first, c.second, e.validation_labels, &terms), plain);
  }
  // Built through a thread pool: the same terms.
  tbb::task_arena arena(2);
  arena.execute([&] {
    const TbbParallelFor parallel;
    const TemperatureGridTerms threaded(all, e.validation_labels, &parallel);
    for (int j : {0, 17, TemperatureGridTerms::kGridPoints - 1}) {
      EXPECT_EQ(*threaded.Find(all[2], j), *terms.Find(all[2], j));
    }
  });
}

// A validation set the model never gets wrong gives no reason to stop sharpening: the tuned
// temperature runs to the end of its range, which AtTuningRangeEnd reports; a well-posed case
// (labels drawn from the model, T0 = 2.5 as above) does not.
TEST(AssemblyTest, TemperatureDrivenToTheRangeEndIsFlagged) {
  Philox rng(43);
  const Matrix z = RandomLogits(500, 4, 2.0, &rng);
  std::vector<int32_t> argmax(500);
  for (int i = 0; i < 500; ++i) z.row(i).maxCoeff(&argmax[i]);
  const double t = TuneTemperature({&z}, {1.0}, argmax);
  EXPECT_NEAR(t, kMinTunedScale, 1e-4);
  EXPECT_TRUE(AtTuningRangeEnd(t));
  const Matrix hot = 2.5f * z;
  const double fair = TuneTemperature({&hot}, {1.0}, SampleLabels(z, &rng));
  EXPECT_FALSE(AtTuningRangeEnd(fair)) << fair;
}

TEST(AssemblyTest, MixtureGaussiansScalesEveryStddev) {
  const MemberGaussian a{{1.0, 2.0}, {0.5, 1.0}}, b{{3.0, 4.0}, {2.0, 3.0}};
  const GaussianMixture g = MixtureGaussians({&a, &b}, {0.25, 0.75}, 2.0);
  EXPECT_EQ(g.mean, (MatrixD{{1.0, 3.0}, {2.0, 4.0}}));
  EXPECT_EQ(g.stddev, (MatrixD{{1.0, 4.0}, {2.0, 6.0}}));
  EXPECT_EQ(g.weights, (std::vector<double>{0.25, 0.75}));
}

TEST(AssemblyTest, TuneStddevScaleMatchesClosedForm) {
  // One member, y_i ~ N(mu_i, (s0 sigma_i)^2). Setting d/ds mean[ln(s sigma_i) +
  // (y_i - mu_i)^2 / (2 s^2 sigma_i^2)] = 0 gives s^2 = mean((y_i - mu_i) / sigma_i)^2.
  Philox rng(51);
  MemberGaussian g;
  std::vector<double> targets;
  double sum_sq = 0;
  for (int i = 0; i < 2000; ++i) {
    g.mean.push_back(rng.NextNormal());
    g.stddev.push_back(0.2 + rng.NextUniform());
    const double eps = 1.7 * rng.NextNormal();
    targets.push_back(g.mean.back() + g.stddev.back() * eps);
    sum_sq += eps * eps;
  }
  const double s = TuneStddevScale({&g}, {1.0}, targets);
  EXPECT_NEAR(std::log(s), 0.5 * std::log(sum_sq / 2000), 1e-6);
}

TEST(SizeCurveTest, IdenticalMembersGiveNoSpread) {
  const Ensemble e = RandomEnsemble(1, 300, 4, 61);
  const std::vector<const Matrix*> val(4, &e.validation[0]), test(4, &e.test[0]);
  const auto curve =
      ClassificationSizeCurve(val, e.validation_labels, test, e.test_labels, 3, 10, 7);
  ASSERT_EQ(curve.size(), 4u);
  for (const SizeCurvePoint& point : curve) {
    EXPECT_EQ(point.nll.min, point.nll.max) << point.members << " members";
    EXPECT_EQ(point.accuracy.min, point.accuracy.max) << point.members << " members";
    EXPECT_EQ(point.ece.min, point.ece.max) << point.members << " members";
    EXPECT_NEAR(point.nll.mean, curve[0].nll.mean, 1e-9);
  }
  Philox rng(62);
  const std::vector<double> y = RandomTargets(200, &rng);
  const MemberGaussian g = RandomMember(y, 0.5, &rng);
  const std::vector<const MemberGaussian*> same(3, &g);
  for (const SizeCurvePoint& point : RegressionSizeCurve(same, y, same, y, 2, 7)) {
    EXPECT_EQ(point.nll.min, point.nll.max) << point.members << " members";
    EXPECT_EQ(point.rmse.min, point.rmse.max) << point.members << " members";
    EXPECT_EQ(point.coverage_90.min, point.coverage_90.max) << point.members << " members";
  }
}

TEST(SizeCurveTest, EndPointsMatchWholeEnsembleAndEveryMember) {
  const Ensemble e = RandomEnsemble(4, 300, 5, 71);
  const auto curve = ClassificationSizeCurve(e.Validation(), e.validation_labels, e.Test(),
                                             e.test_labels, 5, 10, 9);
  ASSERT_EQ(curve.size(), 4u);
  // k = M: the one subset is the whole ensemble, assembled as the run assembles it.
  const std::vector<double> uniform(4, 0.25);
  const double t = TuneTemperature(e.Validation(), uniform, e.validation_labels);
  const ClassificationMetrics full =
      ScoreClassification(MixtureProbabilities(e.Test(), uniform, t), e.test_labels, 10);
  EXPECT_EQ(curve[3].members, 4);
  EXPECT_DOUBLE_EQ(curve[3].nll.mean, full.nll);
  EXPECT_DOUBLE_EQ(curve[3].nll.min, curve[3].nll.max);
  EXPECT_DOUBLE_EQ(curve[3].accuracy.mean, full.accuracy);
  EXPECT_DOUBLE_EQ(curve[3].ece.mean, full.ece);
  // Its validation NLL is the mixture's on the rows t was tuned on, which t minimises: no higher
  // than at T = 1.
  const double validation_nll =
      ScoreClassification(MixtureProbabilities(e.Validation(), uniform, t), e.validation_labels, 10).nll;
  EXPECT_DOUBLE_EQ(curve[3].validation_nll.mean, validation_nll);
  EXPECT_LE(validation_nll,
            ScoreClassification(MixtureProbabilities(e.Validation(), uniform, 1.0), e.validation_labels, 10).nll);
  // k = 1 with 5 >= 4 subsets allowed: each member once, so the spread is over all members.
  std::vector<double> single;
  for (int m = 0; m < 4; ++m) {
    const double tm = TuneTemperature({e.Validation()[m]}, {1.0}, e.validation_labels);
    single.push_back(
        ScoreClassification(MixtureProbabilities({e.Test()[m]}, {1.0}, tm), e.test_labels, 10).nll);
  }
  EXPECT_DOUBLE_EQ(curve[0].nll.min, *std::min_element(single.begin(), single.end()));
  EXPECT_DOUBLE_EQ(curve[0].nll.max, *std::max_element(single.begin(), single.end()));
  EXPECT_NEAR(curve[0].nll.mean, (single[0] + single[1] + single[2] + single[3]) / 4, 1e-12);
  // The average of members beats the average member here, as it should on shared-signal data.
  EXPECT_LT(curve[3].nll.mean, curve[0].nll.mean);
}

TEST(SizeCurveTest, RegressionFullPointMatchesWholeEnsemble) {
  Philox rng(81);
  const std::vector<double> yv = RandomTargets(150, &rng), yt = RandomTargets(150, &rng);
  std::vector<MemberGaussian> val, test;
  for (int m = 0; m < 3; ++m) {
    val.push_back(RandomMember(yv, 0.8, &rng));
    test.push_back(RandomMember(yt, 0.8, &rng));
  }
  const std::vector<const MemberGaussian*> pv = {&val[0], &val[1], &val[2]};
  const std::vector<const MemberGaussian*> pt = {&test[0], &test[1], &test[2]};
  const auto curve = RegressionSizeCurve(pv, yv, pt, yt, 2, 5);
  ASSERT_EQ(curve.size(), 3u);
  const std::vector<double> uniform(3, 1.0 / 3);
  const RegressionMetrics full =
      ScoreRegression(MixtureGaussians(pt, uniform, TuneStddevScale(pv, uniform, yv)), yt);
  EXPECT_DOUBLE_EQ(curve[2].nll.mean, full.nll);
  EXPECT_DOUBLE_EQ(curve[2].rmse.mean, full.rmse);
  EXPECT_DOUBLE_EQ(curve[2].coverage_90.mean, full.coverage_90);
  EXPECT_DOUBLE_EQ(curve[2].validation_nll.mean,
                   ScoreRegression(MixtureGaussians(pv, uniform, TuneStddevScale(pv, uniform, yv)), yv).nll);
  EXPECT_DOUBLE_EQ(curve[2].rmse.min, curve[2].rmse.max);
}

// Large ensembles get a size grid, not every size: all sizes up to 10, then steps of about a
// quarter, always ending at the whole ensemble, so the curve's cost grows about linearly.
TEST(SizeCurveTest, LargeEnsemblesAreScoredOnAGridOfSizes) {
  EXPECT_EQ(MemberGrid(1), (std::vector<int>{1}));
  EXPECT_EQ(MemberGrid(6), (std::vector<int>{1, 2, 3, 4, 5, 6}));
  EXPECT_EQ(MemberGrid(10), (std::vector<int>{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}));
  EXPECT_EQ(MemberGrid(12), (std::vector<int>{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 12}));
  const std::vector<int> big = MemberGrid(200);
  EXPECT_EQ(big, (std::vector<int>{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 13, 16, 20, 25, 31, 39, 49, 61, 76,
                                   95, 119, 149, 186, 200}));
  int cost = 0;
  for (int k : big) cost += k;
  EXPECT_LT(cost * 15, 200 * 201 / 2) << "under 1/15 of scoring every size";

  const Ensemble e = RandomEnsemble(14, 100, 3, 93);
  const auto curve = ClassificationSizeCurve(e.Validation(), e.validation_labels, e.Test(),
                                             e.test_labels, 2, 10, 5);
  const std::vector<int> grid = MemberGrid(14);
  ASSERT_EQ(curve.size(), grid.size());
  for (size_t i = 0; i < grid.size(); ++i) EXPECT_EQ(curve[i].members, grid[i]);
}

TEST(SizeCurveTest, SubsetsAreDeterministicForASeed) {
  const Ensemble e = RandomEnsemble(6, 200, 4, 91);
  const auto curve = [&](uint64_t seed) {
    return ClassificationSizeCurve(e.Validation(), e.validation_labels, e.Test(), e.test_labels, 3,
                                   10, seed);
  };
  const auto a = curve(5), b = curve(5), c = curve(6);
  bool seed_matters = false;
  for (size_t k = 0; k < a.size(); ++k) {
    EXPECT_EQ(a[k].nll.mean, b[k].nll.mean);
    EXPECT_EQ(a[k].nll.min, b[k].nll.min);
    EXPECT_EQ(a[k].nll.max, b[k].nll.max);
    EXPECT_EQ(a[k].ece.mean, b[k].ece.mean);
    EXPECT_EQ(a[k].members, static_cast<int>(k) + 1);
    EXPECT_EQ(a[k].samples, 1);
    seed_matters |= a[k].nll.mean != c[k].nll.mean;
  }
  // k = 2..5 have more than 3 distinct subsets, so another seed draws other subsets.
  EXPECT_TRUE(seed_matters);
}

// The subsets are scored in any order on any threads, each into its own slot: the grid is the
// same, bit for bit, as one thread scoring them in order.
TEST(SizeCurveTest, ScoringSubsetsOnThreadsGivesTheSameGrid) {
  const Ensemble e = RandomEnsemble(7, 300, 4, 97);
  MemberSamples validation, test;
  for (const Matrix* m : e.Validation()) validation.push_back({m, m});
  for (const Matrix* m : e.Test()) test.push_back({m, m});
  const auto serial = ClassificationSizeGrid(validation, e.validation_labels, test, e.test_labels, 4, 10, 3);
  tbb::task_arena arena(2);
  const TbbParallelFor parallel;
  std::vector<SizeCurvePoint> threaded;
  arena.execute([&] {
    threaded = ClassificationSizeGrid(validation, e.validation_labels, test, e.test_labels, 4, 10, 3, &parallel);
  });
  ASSERT_EQ(serial.size(), threaded.size());
  for (size_t p = 0; p < serial.size(); ++p) {
    EXPECT_EQ(serial[p].members, threaded[p].members);
    EXPECT_EQ(serial[p].samples, threaded[p].samples);
    for (auto field : {&SizeCurvePoint::nll, &SizeCurvePoint::validation_nll, &SizeCurvePoint::accuracy,
                       &SizeCurvePoint::ece}) {
      EXPECT_EQ((serial[p].*field).mean, (threaded[p].*field).mean) << "point " << p;
      EXPECT_EQ((serial[p].*field).min, (threaded[p].*field).min) << "point " << p;
      EXPECT_EQ((serial[p].*field).max, (threaded[p].*field).max) << "point " << p;
    }
  }
  EXPECT_EQ(serial.back().members, 7);
  EXPECT_EQ(serial.back().samples, 2);
}

}  // namespace assembly_test
}  // namespace chorus

#include "common/hmc_reference.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "common/mlp_posterior.h"
#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace hmc_reference_test {

using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

constexpr uint64_t kSeed = 20250311;  // every random draw below derives from it
constexpr double kPriorVariance = 0.5;

// Runs every item on a thread of its own: a ParallelFor unlike the serial loop in every way that
// could change the result (order, interleaving, threads).
class ThreadPerItem : public ParallelFor {
 public:
  void Run(int64_t count, void (*body)(void*, int64_t), void* context) const override {
    std::vector<std::thread> threads;
    for (int64_t i = 0; i < count; ++i) threads.emplace_back(body, context, i);
    for (std::thread& t : threads) t.join();
  }
  int Threads() const override { return 2; }
};

// Two-class data on two features: y ~ Bernoulli(sigmoid(0.3 + 1.5 x1 - x2)), x ~ N(0, I), 30
// rows (the classes overlap, so the posterior is proper without the prior); and four test points,
// two of them outside the data (|x| = 3) where averaging over the posterior matters most.
struct LogisticProblem {
  Mlp net{{2, 2}, Activation::kTanh};  // no hidden layer: logits z_k = x . W[:, k] + b_k
  Split train;
  Matrix test_x;
};

LogisticProblem MakeProblem() {
  LogisticProblem p;
  Philox rng(Derive(kSeed, "logistic data"));
  p.train.x.resize(30, 2);
  for (int i = 0; i < 30; ++i) {
    p.train.x(i, 0) = static_cast<float>(rng.NextNormal());
    p.train.x(i, 1) = static_cast<float>(rng.NextNormal());
    const double z = 0.3 + 1.5 * p.train.x(i, 0) - p.train.x(i, 1);
    p.train.labels.push_back(rng.NextUniform() < 1.0 / (1.0 + std::exp(-z)) ? 1 : 0);
  }
  p.test_x.resize(4, 2);
  p.test_x << 0.0f, 0.0f, 1.0f, -1.0f, 3.0f, 3.0f, -2.5f, 1.0f;
  return p;
}

HmcReferenceConfig SmallConfig(int chains, int warmup, int draws, int thinning) {
  HmcReferenceConfig config;
  config.prior_variance = kPriorVariance;
  config.hmc.seed = kSeed;
  config.hmc.chains = chains;
  config.hmc.warmup = warmup;
  config.hmc.draws = draws;
  config.hmc.thinning = thinning;
  config.hmc.trajectory_length = 1.5;  // a few posterior sds (0.3-0.7 here)
  config.hmc.trajectory_jitter = 0.3;
  return config;
}

TEST(ComparePredictivesTest, MatchesHandWorkedExample) {
  // Definitions (from memory) of Izmailov et al. (2021): agreement, the fraction of rows whose
  // top-1 classes match; total variation per row, 0.5 sum_k |p_k - q_k| (Levin, Peres & Wilmer
  // 2009, "Markov Chains and Mixing Times", Prop. 4.2), averaged over rows.
  MatrixD reference(3, 3), candidate(3, 3);
  reference << 0.7, 0.2, 0.1,   // argmax 0
               0.3, 0.3, 0.4,   // argmax 2
               0.5, 0.5, 0.0;   // tie of 0 and 1: the lowest index, 0
  candidate << 0.6, 0.3, 0.1,   // argmax 0: agrees; TV 0.5 (0.1 + 0.1 + 0)   = 0.1
               0.5, 0.1, 0.4,   // argmax 0: differs; TV 0.5 (0.2 + 0.2 + 0)  = 0.2
               0.6, 0.4, 0.0;   // argmax 0: agrees (a highest-index tie rule would not); TV 0.1
  // agreement = 2/3; mean TV = (0.1 + 0.2 + 0.1) / 3 = 0.4 / 3. Tolerance: a few rounding errors.
  auto agreement = ComparePredictives(reference, candidate);
  ASSERT_TRUE(agreement.ok()) << agreement.status().ToString();
  EXPECT_NEAR(agreement.value().top1_agreement, 2.0 / 3.0, 1e-12);
  EXPECT_NEAR(agreement.value().mean_total_variation, 0.4 / 3.0, 1e-12);

  auto mismatch = ComparePredictives(reference, candidate.leftCols(2));
  EXPECT_EQ(mismatch.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(mismatch.status().message().find("3 x 3"), std::string::npos) << mismatch.status().ToString();
  EXPECT_NE(mismatch.status().message().find("3 x 2"), std::string::npos) << mismatch.status().ToString();
  EXPECT_EQ(ComparePredictives(reference, candidate.topRows(2)).status().code(),
            Status::Code::kInvalidInput);
}

TEST(HmcReferenceTest, LogisticPredictiveMatchesQuadrature) {
  // With no hidden layer and two classes, p(y = 1 | x) = sigmoid((b1 - b0) + x . (W[:,1] - W[:,0])).
  // Under the prior N(0, v I) the differences d have prior N(0, 2v I) and are independent of the
  // sums, on which the likelihood does not depend; so d's posterior is Bayesian logistic regression
  // with prior variance 2v, and the network's predictive is its predictive. The reference computes
  // that by adaptive Gauss-Hermite quadrature in SciPy (tests/reference/scipy_logistic_predictive.py).
  const LogisticProblem p = MakeProblem();
  const std::string dir = MakeTempDir("hmc-reference");
  MatrixD labels(30, 1);
  for (int i = 0; i < 30; ++i) labels(i, 0) = p.train.labels[i];
  WriteMatrixText(dir + "/train_x.txt", p.train.x.cast<double>());  // the float32 values it trains on
  WriteMatrixText(dir + "/train_y.txt", labels);
  WriteMatrixText(dir + "/test_x.txt", p.test_x.cast<double>());
  auto ref = ParseReferenceOutput(
      RunReferenceScript("scipy_logistic_predictive.py", {dir, std::to_string(2 * kPriorVariance)}));
  ASSERT_EQ(ref["predictive"].size(), 4u);
  std::filesystem::remove_all(dir);

  const HmcReferenceConfig config = SmallConfig(4, 300, 1000, 2);
  auto result = RunHmcReference(p.net, Task::kClassification, p.train, p.test_x,
                                {std::vector<double>(6, 0.0)}, config, nullptr);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  const HmcReference& r = result.value();
  EXPECT_EQ(r.draws, 4 * 500);
  EXPECT_EQ(r.divergences, 0);
  // Vehtari et al. (2021) recommend R-hat < 1.01 and a bulk ESS > 400 before trusting estimates
  // (from memory).
  EXPECT_LT(r.max_r_hat, 1.01);
  EXPECT_GT(r.min_ess, 400.0);
  ASSERT_EQ(r.predictive.rows(), 4);
  ASSERT_EQ(r.predictive.cols(), 2);
  double plugin_miss = 0.0;  // how far a point estimate (the MAP) lands, in tolerances
  for (int i = 0; i < 4; ++i) {
    // MCSE of a mean = sd / sqrt(ESS) (Vehtari et al. 2021), with the exact posterior sd from the
    // quadrature and the smallest ESS of any probability; 4 MCSEs fail a correct sampler about
    // once in 16,000 per row. Float32 rounding of the parameters moves p by ~1e-7.
    const double tolerance = 4.0 * ref["sd"][i] / std::sqrt(r.min_ess);
    EXPECT_NEAR(r.predictive(i, 1), ref["predictive"][i], tolerance) << "test row " << i;
    EXPECT_NEAR(r.predictive(i, 0) + r.predictive(i, 1), 1.0, 1e-12);
    plugin_miss = std::max(plugin_miss, std::abs(ref["plugin"][i] - ref["predictive"][i]) / tolerance);
  }
  // A point estimate must fail somewhere, or the check could not tell averaging from plugging in
  // the mode (measured: the MAP misses row 2 by 2.8 tolerances).
  EXPECT_GT(plugin_miss, 1.0) << "the check cannot tell the posterior mean from the MAP prediction";
}

TEST(HmcReferenceTest, DiagnosticsMatchNumpyOnTheSameDraws) {
  // The chains again through the public HMC interface (chain c is a pure function of (seed, c),
  // common/hmc.h), each (test row, class) probability series by PosteriorPredictive on one draw at
  // a time, and R-hat and bulk ESS of each series by the NumPy implementation of Vehtari et al.
  // (2021) in tests/reference/numpy_mcmc_diagnostics.py. Tolerance 1e-9 relative: the two
  // implementations differ only in summation order (FFT vs direct autocovariances).
  const LogisticProblem p = MakeProblem();
  const HmcReferenceConfig config = SmallConfig(3, 100, 200, 1);
  const std::vector<double> start(6, 0.1);
  auto result = RunHmcReference(p.net, Task::kClassification, p.train, p.test_x, {start}, config, nullptr);
  ASSERT_TRUE(result.ok()) << result.status().ToString();

  auto posterior = MlpLogPosterior::Create(p.net, Task::kClassification, p.train, kPriorVariance);
  ASSERT_TRUE(posterior.ok()) << posterior.status().ToString();
  std::vector<MatrixD> series(8, MatrixD(3, 200));  // (row, class) -> chains x draws
  std::vector<MatrixD> draws;
  double accept_sum = 0.0;
  int64_t divergences = 0;
  for (int c = 0; c < 3; ++c) {
    auto chain = RunHmcChain(posterior.value(), start, config.hmc, c);
    ASSERT_TRUE(chain.ok()) << chain.status().ToString();
    draws.push_back(chain.value().draws);
    accept_sum += chain.value().mean_accept_probability;
    divergences += chain.value().divergences;
    for (int s = 0; s < 200; ++s) {
      const MatrixD one = PosteriorPredictive(p.net, Task::kClassification,
                                              {chain.value().draws.row(s)}, p.test_x);
      for (int k = 0; k < 8; ++k) series[k](c, s) = one(k / 2, k % 2);
    }
  }
  const std::string dir = MakeTempDir("hmc-reference-diagnostics");
  std::vector<std::string> paths;
  for (int k = 0; k < 8; ++k) {
    paths.push_back(dir + "/" + std::to_string(k) + ".txt");
    WriteMatrixText(paths.back(), series[k]);
  }
  auto ref = ParseReferenceOutput(RunReferenceScript("numpy_mcmc_diagnostics.py", paths));
  ASSERT_EQ(ref["rank_rhat"].size(), 8u);
  std::filesystem::remove_all(dir);
  const double max_r_hat = *std::max_element(ref["rank_rhat"].begin(), ref["rank_rhat"].end());
  const double min_ess = *std::min_element(ref["bulk_ess"].begin(), ref["bulk_ess"].end());
  EXPECT_NEAR(result.value().max_r_hat, max_r_hat, 1e-9 * max_r_hat);
  EXPECT_NEAR(result.value().min_ess, min_ess, 1e-9 * min_ess);
  EXPECT_EQ(result.value().draws, 600);
  EXPECT_NEAR(result.value().mean_accept_probability, accept_sum / 3, 1e-15);
  EXPECT_EQ(result.value().divergences, divergences);
  // The predictive is the mean of the same draws' softmax (PosteriorPredictive over all chains).
  const MatrixD all = PosteriorPredictive(p.net, Task::kClassification, draws, p.test_x);
  EXPECT_LT((result.value().predictive - all).cwiseAbs().maxCoeff(), 1e-14);
}

TEST(HmcReferenceTest, ParallelEqualsSerialBitForBit) {
  // The contract of common/hmc_reference.h: the result does not depend on `parallel`.
  const LogisticProblem p = MakeProblem();
  const HmcReferenceConfig config = SmallConfig(3, 50, 40, 2);
  const std::vector<std::vector<double>> starts = {std::vector<double>(6, 0.0),
                                                   std::vector<double>(6, 0.2),
                                                   std::vector<double>(6, -0.2)};
  const ThreadPerItem threads;
  auto serial = RunHmcReference(p.net, Task::kClassification, p.train, p.test_x, starts, config, nullptr);
  auto parallel = RunHmcReference(p.net, Task::kClassification, p.train, p.test_x, starts, config, &threads);
  ASSERT_TRUE(serial.ok()) << serial.status().ToString();
  ASSERT_TRUE(parallel.ok()) << parallel.status().ToString();
  const HmcReference &a = serial.value(), &b = parallel.value();
  EXPECT_EQ(a.predictive, b.predictive);
  EXPECT_EQ(a.max_r_hat, b.max_r_hat);
  EXPECT_EQ(a.min_ess, b.min_ess);
  EXPECT_EQ(a.mean_accept_probability, b.mean_accept_probability);
  EXPECT_EQ(a.divergences, b.divergences);
  EXPECT_EQ(a.draws, 3 * 20);
  EXPECT_EQ(b.draws, 3 * 20);
}

TEST(HmcReferenceTest, RefusesBadInput) {
  const LogisticProblem p = MakeProblem();
  const HmcReferenceConfig config = SmallConfig(3, 10, 20, 1);
  const std::vector<double> start(6, 0.0);
  const auto refusal = [&](Task task, const std::vector<std::vector<double>>& starts,
                           const HmcReferenceConfig& c) {
    auto r = RunHmcReference(p.net, task, p.train, p.test_x, starts, c, nullptr);
    EXPECT_EQ(r.status().code(), Status::Code::kInvalidInput);
    return r.status().message();
  };
  EXPECT_NE(refusal(Task::kRegression, {start}, config).find("classification only"), std::string::npos);
  EXPECT_NE(refusal(Task::kClassification, {std::vector<double>(5, 0.0)}, config)
                .find("start 0 has 5 entries, the network 6 parameters"),
            std::string::npos);
  EXPECT_NE(refusal(Task::kClassification, {start, start}, config).find("2 starts for 3 chains"),
            std::string::npos);
  HmcReferenceConfig few = config;
  few.hmc.thinning = 6;  // 20 / 6 = 3 kept draws
  EXPECT_NE(refusal(Task::kClassification, {start}, few).find(">= 4 kept draws"), std::string::npos);
  HmcReferenceConfig prior = config;
  prior.prior_variance = 0.0;
  EXPECT_NE(refusal(Task::kClassification, {start}, prior).find("prior_variance"), std::string::npos);
}

}  // namespace hmc_reference_test
}  // namespace chorus

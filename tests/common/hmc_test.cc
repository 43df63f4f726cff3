#include "common/hmc.h"

#include <gtest/gtest.h>

#include <Eigen/LU>
#include <algorithm>
#include <cmath>
#include <functional>
#include <string>
#include <vector>

#include "common/mcmc_diagnostics.h"
#include "common/mlp.h"
#include "common/mlp_posterior.h"
#include "common/rng.h"

namespace chorus {
namespace hmc_test {

constexpr uint64_t kSeed = 20250301;  // every random draw below derives from it

// Every moment check allows 4 Monte Carlo standard errors, MCSE = sd / sqrt(ESS) with the ESS of
// common/mcmc_diagnostics.h (the MCSE of a mean, Vehtari et al. 2021). A correct sampler passes
// each check with probability 0.99994, so a test's dozen checks fail by chance about once in
// 1,000 seeds; a biased sampler misses by many MCSEs.
constexpr double kMcseBound = 4.0;

// One scalar per draw, chains x iterations, for the diagnostics.
MatrixD Series(const HmcResult& result, const std::function<double(const double*)>& f) {
  const Eigen::Index iterations = result.chains.front().draws.rows();
  MatrixD series(static_cast<Eigen::Index>(result.chains.size()), iterations);
  for (size_t c = 0; c < result.chains.size(); ++c)
    for (Eigen::Index i = 0; i < iterations; ++i)
      series(c, i) = f(result.chains[c].draws.row(i).data());
  return series;
}

// Checks that the mean of the series is within kMcseBound MCSEs of `expected`.
void ExpectMeanWithinMcse(const MatrixD& series, double expected, const std::string& what) {
  const double mean = series.mean();
  const double sd = std::sqrt((series.array() - mean).square().sum() / (series.size() - 1.0));
  const double ess = EffectiveSampleSize(series);
  const double mcse = sd / std::sqrt(ess);
  EXPECT_LE(std::abs(mean - expected), kMcseBound * mcse)
      << what << ": mean " << mean << ", expected " << expected << ", MCSE " << mcse << " (ESS "
      << ess << ")";
}

// Means and covariances of a HMC sample against exact values.
void ExpectMomentsWithinMcse(const HmcResult& result, const Eigen::VectorXd& mean,
                             const Eigen::MatrixXd& cov) {
  for (Eigen::Index i = 0; i < mean.size(); ++i) {
    ExpectMeanWithinMcse(Series(result, [i](const double* x) { return x[i]; }), mean(i),
                         "mean " + std::to_string(i));
    for (Eigen::Index j = 0; j <= i; ++j) {
      // E[(x_i - m_i)(x_j - m_j)] = Sigma_ij, with the exact means m.
      const auto product = [&, i, j](const double* x) { return (x[i] - mean(i)) * (x[j] - mean(j)); };
      ExpectMeanWithinMcse(Series(result, product), cov(i, j),
                           "cov " + std::to_string(i) + "," + std::to_string(j));
    }
  }
}

// The log density of N(mean, cov) up to a constant, and its gradient -cov^-1 (theta - mean).
LogDensityFunction GaussianTarget(const Eigen::VectorXd& mean, const Eigen::MatrixXd& cov) {
  const Eigen::MatrixXd precision = cov.inverse();
  return [mean, precision](const std::vector<double>& theta, std::vector<double>& grad) {
    const Eigen::VectorXd d = Eigen::Map<const Eigen::VectorXd>(theta.data(), theta.size()) - mean;
    const Eigen::VectorXd g = -(precision * d);
    grad.assign(g.data(), g.data() + g.size());
    return 0.5 * d.dot(g);
  };
}

TEST(HmcTest, BayesianLinearRegressionMatchesClosedFormPosterior) {
  // y = w0 + w1 x1 + w2 x2 + noise of known precision beta; prior w ~ N(0, alpha^-1 I).
  constexpr int kRows = 30;
  constexpr double kAlpha = 1.0, kBeta = 4.0;
  Philox rng(Derive(kSeed, "linear data"));
  Eigen::MatrixXd phi(kRows, 3);
  Eigen::VectorXd t(kRows);
  for (int i = 0; i < kRows; ++i) {
    phi.row(i) << 1.0, rng.NextNormal(), rng.NextNormal();
    t(i) = 0.5 - 1.0 * phi(i, 1) + 2.0 * phi(i, 2) + rng.NextNormal() / std::sqrt(kBeta);
  }
  // Reference: Bishop, PRML (2006), eqs. 3.53-3.54: S_N^-1 = alpha I + beta Phi^T Phi,
  // m_N = beta S_N Phi^T t.
  const Eigen::MatrixXd precision = kAlpha * Eigen::MatrixXd::Identity(3, 3) + kBeta * phi.transpose() * phi;
  const Eigen::MatrixXd cov = precision.inverse();
  const Eigen::VectorXd mean = kBeta * cov * phi.transpose() * t;
  // The sampler sees only the unnormalised log posterior, not the closed form.
  const LogDensityFunction target = [&](const std::vector<double>& w, std::vector<double>& grad) {
    const Eigen::Map<const Eigen::VectorXd> wv(w.data(), 3);
    const Eigen::VectorXd r = t - phi * wv;
    const Eigen::VectorXd g = kBeta * phi.transpose() * r - kAlpha * wv;
    grad.assign(g.data(), g.data() + 3);
    return -0.5 * kBeta * r.squaredNorm() - 0.5 * kAlpha * wv.squaredNorm();
  };
  HmcConfig config;
  config.seed = kSeed;
  config.warmup = 300;
  config.draws = 1000;
  config.trajectory_length = 0.2;  // about a posterior sd (0.05-0.1) times 2-4
  config.trajectory_jitter = 0.2;
  auto result = RunHmc(target, {{0.0, 0.0, 0.0}}, config);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  ExpectMomentsWithinMcse(result.value(), mean, cov);
  for (const HmcChain& chain : result.value().chains) EXPECT_EQ(chain.divergences, 0);
}

TEST(HmcTest, CorrelatedGaussianMatchesExactMoments) {
  // N(mu, Sigma) with sds 1 and 2 and correlation 0.9. Reference: the target's exact moments,
  // mu and Sigma (a strongly correlated target stresses an identity mass matrix).
  Eigen::VectorXd mean(2);
  mean << 1.0, -1.0;
  Eigen::MatrixXd cov(2, 2);
  cov << 1.0, 1.8, 1.8, 4.0;
  HmcConfig config;
  config.seed = kSeed;
  config.warmup = 300;
  config.draws = 1000;
  config.trajectory_length = 3.0;
  config.trajectory_jitter = 0.3;
  auto result = RunHmc(GaussianTarget(mean, cov), {{0.0, 0.0}}, config);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  ExpectMomentsWithinMcse(result.value(), mean, cov);
}


// Bayesian logistic regression, y ~ Bernoulli(sigmoid(a + b x)), prior a, b ~ N(0, 1).
struct LogisticProblem {
  std::vector<double> x;
  std::vector<int> y;
  static constexpr double kPriorVariance = 1.0;

  // log p = sum_i [y_i z_i - log(1 + e^z_i)] - (a^2 + b^2) / (2 v), z = a + b x; d/dz = y - sigmoid(z)
  double LogPosterior(double a, double b, double* grad_a, double* grad_b) const {
    double lp = -(a * a + b * b) / (2 * kPriorVariance);
    double ga = -a / kPriorVariance, gb = -b / kPriorVariance;
    for (size_t i = 0; i < x.size(); ++i) {
      const double z = a + b * x[i];
      lp += y[i] * z - (z > 0 ? z + std::log1p(std::exp(-z)) : std::log1p(std::exp(z)));
      const double r = y[i] - 1.0 / (1.0 + std::exp(-z));
      ga += r;
      gb += r * x[i];
    }
    if (grad_a != nullptr) *grad_a = ga, *grad_b = gb;
    return lp;
  }
};

LogisticProblem MakeLogisticProblem() {
  LogisticProblem p;
  Philox rng(Derive(kSeed, "logistic data"));
  for (int i = 0; i < 20; ++i) {  // 20 rows; the classes overlap, so the data are not separable
    p.x.push_back(-2.0 + 4.0 * i / 19.0);
    const double prob = 1.0 / (1.0 + std::exp(-(0.5 + 1.5 * p.x.back())));
    p.y.push_back(rng.NextUniform() < prob ? 1 : 0);
  }
  return p;
}

// Posterior mean and covariance of (a, b) by quadrature on a 401 x 401 grid over [-8, 8]^2: an
// independent method, no sampling. The integrand is smooth and decays at least like the Gaussian
// prior, and the spacing 0.04 is a tenth of the posterior's sds, so the rule's error is far
// below the MCSE (~1e-2). Fails the test unless the density on the grid's edge is below 1e-8 of
// its peak, so the truncated tails are negligible too.
void GridMoments(const LogisticProblem& problem, Eigen::VectorXd& mean, Eigen::MatrixXd& cov) {
  constexpr int kGrid = 401;
  constexpr double kLow = -8.0, kHigh = 8.0, kH = (kHigh - kLow) / (kGrid - 1);
  Eigen::MatrixXd log_density(kGrid, kGrid);
  for (int i = 0; i < kGrid; ++i)
    for (int j = 0; j < kGrid; ++j)
      log_density(i, j) = problem.LogPosterior(kLow + i * kH, kLow + j * kH, nullptr, nullptr);
  const Eigen::MatrixXd weight = (log_density.array() - log_density.maxCoeff()).exp().matrix();
  double edge = 0.0;
  for (int k = 0; k < kGrid; ++k) {
    edge = std::max({edge, weight(0, k), weight(kGrid - 1, k), weight(k, 0), weight(k, kGrid - 1)});
  }
  EXPECT_LT(edge, 1e-8) << "the grid does not cover the posterior";
  mean = Eigen::VectorXd::Zero(2);
  cov = Eigen::MatrixXd::Zero(2, 2);
  const double total = weight.sum();
  for (int i = 0; i < kGrid; ++i) {
    for (int j = 0; j < kGrid; ++j) {
      const Eigen::Vector2d v(kLow + i * kH, kLow + j * kH);
      mean += weight(i, j) / total * v;
      cov += weight(i, j) / total * v * v.transpose();
    }
  }
  cov -= mean * mean.transpose();
}

TEST(HmcTest, LogisticRegressionMatchesGridQuadrature) {
  const LogisticProblem problem = MakeLogisticProblem();
  Eigen::VectorXd mean;
  Eigen::MatrixXd cov;
  GridMoments(problem, mean, cov);  // the reference
  const LogDensityFunction target = [&](const std::vector<double>& w, std::vector<double>& grad) {
    grad.resize(2);
    return problem.LogPosterior(w[0], w[1], &grad[0], &grad[1]);
  };
  HmcConfig config;
  config.seed = kSeed;
  config.warmup = 300;
  config.draws = 1000;
  config.trajectory_length = 1.5;
  config.trajectory_jitter = 0.3;
  auto result = RunHmc(target, {{0.0, 0.0}}, config);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  ExpectMomentsWithinMcse(result.value(), mean, cov);
}

TEST(HmcTest, SoftmaxMlpPosteriorMatchesLogisticQuadrature) {
  // End to end through common/mlp_posterior.h: a 1-2 network with no hidden layer and a softmax
  // head has logits z_k = w_k x + b_k, so p(y = 1) = sigmoid((b1 - b0) + (w1 - w0) x). Under the
  // prior N(0, 0.5 I) the differences (b1 - b0, w1 - w0) have prior N(0, I) and are independent
  // of the sums, so their posterior is the logistic posterior above (grid reference), and the
  // sums keep their prior: w0 + w1 and b0 + b1 ~ N(0, 1).
  const LogisticProblem problem = MakeLogisticProblem();
  Eigen::VectorXd mean;
  Eigen::MatrixXd cov;
  GridMoments(problem, mean, cov);
  const Mlp net({1, 2}, Activation::kTanh);  // parameters: w0, w1, b0, b1
  Split data;
  data.x.resize(static_cast<Eigen::Index>(problem.x.size()), 1);
  for (size_t i = 0; i < problem.x.size(); ++i) {
    data.x(i, 0) = static_cast<float>(problem.x[i]);
    data.labels.push_back(problem.y[i]);
  }
  auto posterior = MlpLogPosterior::Create(net, Task::kClassification, data, 0.5);
  ASSERT_TRUE(posterior.ok()) << posterior.status().ToString();
  HmcConfig config;
  config.seed = kSeed;
  config.chains = 2;
  config.warmup = 300;
  config.draws = 1000;
  config.trajectory_length = 1.5;
  config.trajectory_jitter = 0.3;
  auto result = RunHmc(posterior.value(), {{0.0, 0.0, 0.0, 0.0}}, config);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  const HmcResult& r = result.value();
  const auto a = [](const double* t) { return t[3] - t[2]; };
  const auto b = [](const double* t) { return t[1] - t[0]; };
  ExpectMeanWithinMcse(Series(r, a), mean(0), "b1 - b0");
  ExpectMeanWithinMcse(Series(r, b), mean(1), "w1 - w0");
  ExpectMeanWithinMcse(Series(r, [&](const double* t) { return std::pow(a(t) - mean(0), 2); }),
                       cov(0, 0), "var(b1 - b0)");
  ExpectMeanWithinMcse(Series(r, [&](const double* t) { return (a(t) - mean(0)) * (b(t) - mean(1)); }),
                       cov(0, 1), "cov");
  ExpectMeanWithinMcse(Series(r, [&](const double* t) { return std::pow(b(t) - mean(1), 2); }),
                       cov(1, 1), "var(w1 - w0)");
  ExpectMeanWithinMcse(Series(r, [](const double* t) { return t[0] + t[1]; }), 0.0, "w0 + w1");
  ExpectMeanWithinMcse(Series(r, [](const double* t) { return std::pow(t[2] + t[3], 2); }), 1.0,
                       "var(b0 + b1)");
}

TEST(HmcTest, StaysInsideSupportOfHalfNormal) {
  // log pi = -x^2/2 for x > 0, -inf otherwise: proposals that leave the support are rejected.
  // Reference: the half-normal has E[x] = sqrt(2/pi) and E[x^2] = 1 (standard results).
  const LogDensityFunction target = [](const std::vector<double>& x, std::vector<double>& grad) {
    grad.assign(1, -x[0]);
    return x[0] > 0 ? -0.5 * x[0] * x[0] : -HUGE_VAL;
  };
  HmcConfig config;
  config.seed = kSeed;
  config.warmup = 300;
  config.draws = 1000;
  config.trajectory_length = 1.0;
  config.trajectory_jitter = 0.3;
  auto result = RunHmc(target, {{1.0}}, config);
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  for (const HmcChain& chain : result.value().chains) EXPECT_GT(chain.draws.minCoeff(), 0.0);
  ExpectMeanWithinMcse(Series(result.value(), [](const double* x) { return x[0]; }),
                       std::sqrt(2.0 / M_PI), "E[x]");
  ExpectMeanWithinMcse(Series(result.value(), [](const double* x) { return x[0] * x[0]; }), 1.0,
                       "E[x^2]");
}

// A smooth non-Gaussian target for the integrator checks:
//   log pi = -(t0^2 / 2 + t1^4 / 4 + 0.3 t0 t1)
double Quartic(const std::vector<double>& t, std::vector<double>& grad) {
  grad = {-(t[0] + 0.3 * t[1]), -(t[1] * t[1] * t[1] + 0.3 * t[0])};
  return -(0.5 * t[0] * t[0] + 0.25 * std::pow(t[1], 4) + 0.3 * t[0] * t[1]);
}

PhaseState QuarticState(double t0, double t1, double p0, double p1) {
  PhaseState s;
  s.theta = {t0, t1};
  s.momentum = {p0, p1};
  s.log_density = Quartic(s.theta, s.grad);
  return s;
}

TEST(LeapfrogTest, IsTimeReversible) {
  // Reference: Neal (2011), sec. 5.2.3.3: leapfrog steps from (theta, p) followed by the same
  // number from (theta', -p') return to (theta, -p). Up to rounding: 100 steps of O(1) values in
  // double accumulate errors of order 100 * 1e-16, so 1e-12 leaves a wide margin.
  PhaseState s = QuarticState(0.7, -1.2, 0.4, 1.1);
  const PhaseState start = s;
  ASSERT_TRUE(Leapfrog(Quartic, 0.1, 50, s));
  EXPECT_GT(std::abs(s.theta[0] - start.theta[0]), 0.1);  // it went somewhere
  for (double& p : s.momentum) p = -p;
  ASSERT_TRUE(Leapfrog(Quartic, 0.1, 50, s));
  for (int i = 0; i < 2; ++i) {
    EXPECT_NEAR(s.theta[i], start.theta[i], 1e-12);
    EXPECT_NEAR(-s.momentum[i], start.momentum[i], 1e-12);
  }
}

TEST(LeapfrogTest, PreservesVolume) {
  // Reference: Neal (2011), sec. 5.2.3.3: each leapfrog step is a composition of shears, so the
  // map (theta, p) -> (theta', p') has Jacobian determinant 1. The Jacobian by central
  // differences with h = 1e-5 has truncation error ~h^2 |f'''| ~ 1e-9 and rounding error
  // ~1e-16 / h ~ 1e-11 per entry; 1e-6 on the determinant leaves a wide margin, while a map that
  // is off by a factor (e.g. a step missing its half-step) changes it at order 1e-1.
  const double base[4] = {0.7, -1.2, 0.4, 1.1}, h = 1e-5;
  Eigen::Matrix4d jacobian;
  for (int k = 0; k < 4; ++k) {
    double plus[4], minus[4];
    std::copy(base, base + 4, plus);
    std::copy(base, base + 4, minus);
    plus[k] += h;
    minus[k] -= h;
    PhaseState a = QuarticState(plus[0], plus[1], plus[2], plus[3]);
    PhaseState b = QuarticState(minus[0], minus[1], minus[2], minus[3]);
    ASSERT_TRUE(Leapfrog(Quartic, 0.1, 20, a));
    ASSERT_TRUE(Leapfrog(Quartic, 0.1, 20, b));
    for (int i = 0; i < 2; ++i) {
      jacobian(i, k) = (a.theta[i] - b.theta[i]) / (2 * h);
      jacobian(2 + i, k) = (a.momentum[i] - b.momentum[i]) / (2 * h);
    }
  }
  EXPECT_NEAR(jacobian.determinant(), 1.0, 1e-6);
}

// The largest |H(t) - H(0)| along a leapfrog trajectory of total time 2 with step `step`.
double MaxEnergyError(double step) {
  PhaseState s = QuarticState(0.7, -1.2, 0.4, 1.1);
  const double h0 = Hamiltonian(s);
  double worst = 0.0;
  for (int i = 0; i < static_cast<int>(std::lround(2.0 / step)); ++i) {
    EXPECT_TRUE(Leapfrog(Quartic, step, 1, s));
    worst = std::max(worst, std::abs(Hamiltonian(s) - h0));
  }
  return worst;
}

TEST(LeapfrogTest, EnergyErrorIsSecondOrderInStep) {
  // Reference: Neal (2011), sec. 5.2.3.3: the leapfrog method's global error over a fixed time is
  // O(eps^2), so halving the step divides the energy error by about 4. The O(eps^4) remainder
  // moves the ratio by a few percent at these steps; [3.5, 4.5] leaves room for it while excluding
  // a first-order method (ratio 2) or a fourth-order one (16).
  const double e1 = MaxEnergyError(0.04), e2 = MaxEnergyError(0.02), e3 = MaxEnergyError(0.01);
  EXPECT_GT(e1, 1e-6);  // the error is well above rounding
  EXPECT_NEAR(e1 / e2, 4.0, 0.5) << e1 << " " << e2;
  EXPECT_NEAR(e2 / e3, 4.0, 0.5) << e2 << " " << e3;
}

// A 50-dimensional Gaussian with standard deviations spread evenly over [0.5, 2].
double Spread50(const std::vector<double>& t, std::vector<double>& grad) {
  grad.resize(t.size());
  double lp = 0.0;
  for (size_t i = 0; i < t.size(); ++i) {
    const double sd = 0.5 + 1.5 * static_cast<double>(i) / (t.size() - 1.0);
    grad[i] = -t[i] / (sd * sd);
    lp += 0.5 * t[i] * grad[i];
  }
  return lp;
}

TEST(HmcTest, DualAveragingReachesTargetAcceptance) {
  // Reference: Hoffman & Gelman (2014), sec. 3.2: dual averaging drives the warm-up's average
  // Metropolis acceptance probability to the target delta. Sampling then uses the averaged step
  // eps-bar, whose acceptance is a little above delta (eps-bar still remembers the small early
  // steps); measured +0.01 to +0.04 on this target with 1,000 warm-up iterations. The MC error of
  // a 4-chain mean over 4,000 draws is ~0.003. Tolerance 0.05.
  for (double delta : {0.65, 0.8}) {
    HmcConfig config;
    config.seed = kSeed;
    config.warmup = 1000;
    config.draws = 1000;
    config.trajectory_length = 3.0;
    config.trajectory_jitter = 0.2;
    config.target_acceptance = delta;
    auto result = RunHmc(Spread50, {std::vector<double>(50, 0.0)}, config);
    ASSERT_TRUE(result.ok()) << result.status().ToString();
    double mean_acceptance = 0.0;
    for (const HmcChain& chain : result.value().chains) mean_acceptance += chain.mean_accept_probability / 4;
    EXPECT_NEAR(mean_acceptance, delta, 0.05) << "target " << delta;
  }
}

TEST(HmcTest, ResultsArePureFunctionOfSeedAndChain) {
  // The reproducibility contract of common/hmc.h: chain c depends on (seed, c) only.
  HmcConfig config;
  config.seed = kSeed;
  config.chains = 3;
  config.warmup = 50;
  config.draws = 40;
  config.thinning = 3;
  config.trajectory_jitter = 0.2;
  const std::vector<std::vector<double>> start = {{0.1, 0.2}, {0.3, 0.4}, {0.5, 0.6}};
  auto first = RunHmc(Quartic, start, config);
  auto again = RunHmc(Quartic, start, config);
  ASSERT_TRUE(first.ok() && again.ok());
  ASSERT_EQ(first.value().chains.size(), 3u);
  EXPECT_EQ(first.value().chains[0].draws.rows(), 13);  // floor(40 / 3)
  auto alone = RunHmcChain(Quartic, start[2], config, 2);
  ASSERT_TRUE(alone.ok());
  for (int c = 0; c < 3; ++c) EXPECT_EQ(first.value().chains[c].draws, again.value().chains[c].draws);
  EXPECT_EQ(alone.value().draws, first.value().chains[2].draws);
  EXPECT_EQ(alone.value().step_size, first.value().chains[2].step_size);
  EXPECT_NE(first.value().chains[0].draws, first.value().chains[1].draws);
  config.seed = kSeed + 1;
  auto other = RunHmc(Quartic, start, config);
  ASSERT_TRUE(other.ok());
  EXPECT_NE(other.value().chains[0].draws, first.value().chains[0].draws);
}

TEST(HmcTest, RejectsBadInputAndStopsOnRequest) {
  HmcConfig config;
  config.warmup = 10;
  config.draws = 10;
  const auto code = [](const HmcConfig& c, const std::vector<std::vector<double>>& start) {
    return RunHmc(Quartic, start, c).status().code();
  };
  HmcConfig c = config;
  c.target_acceptance = 1.0;
  EXPECT_EQ(code(c, {{0.0, 0.0}}), Status::Code::kInvalidInput);
  c = config;
  c.thinning = 11;
  EXPECT_EQ(code(c, {{0.0, 0.0}}), Status::Code::kInvalidInput);
  EXPECT_EQ(code(config, {{0.0, 0.0}, {0.0, 0.0}}), Status::Code::kInvalidInput);  // 2 for 4 chains
  const LogDensityFunction outside = [](const std::vector<double>&, std::vector<double>& g) {
    g.assign(1, 0.0);
    return -HUGE_VAL;
  };
  EXPECT_EQ(RunHmc(outside, {{0.0}}, config).status().code(), Status::Code::kInvalidInput);
  c = config;
  c.progress_every = 5;
  int64_t calls = 0;
  auto stopped = RunHmc(Quartic, {{0.0, 0.0}}, c, [&](const HmcProgress& p) {
    ++calls;
    EXPECT_EQ(p.iteration, 5 * calls);
    EXPECT_EQ(p.total_iterations, 20);
    return p.iteration < 15;
  });
  EXPECT_EQ(stopped.status().code(), Status::Code::kCancelled);
  EXPECT_EQ(calls, 3);
}

}  // namespace hmc_test
}  // namespace chorus

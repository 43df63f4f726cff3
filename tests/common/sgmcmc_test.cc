// common/cyclical_schedule.h and common/sgmcmc_step.h: the schedule is Zhang et al. 2020 eq. 1
// step by step; SGLD and SGHMC on Gaussian targets with exact gradients reach the stationary
// moments of their discretised linear recursions (solved in closed form or by the discrete
// Lyapunov equation, cross-checked against SciPy), within Monte Carlo standard errors computed from
// the same recursions; the noise is a pure function of (seed, step, parameter index).
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <cmath>
#include <cstring>
#include <string>
#include <vector>

#include "common/cyclical_schedule.h"
#include "common/rng.h"
#include "common/sgmcmc_step.h"

namespace chorus {
namespace sgmcmc_test {

using Eigen::MatrixXd;
using Eigen::VectorXd;

// --- schedule ---------------------------------------------------------------------------------

// Zhang et al. 2020 eq. 1 as printed, k = 1 .. K.
double PaperStepSize(int64_t k, int64_t K, int M, double alpha0) {
  const double length = std::ceil(static_cast<double>(K) / M);
  const double r = std::fmod(static_cast<double>(k - 1), length) / length;
  return alpha0 / 2.0 * (std::cos(M_PI * r) + 1.0);
}

TEST(CyclicalScheduleTest, StepSizeIsZhangEquationOneAtEveryStep) {
  const int64_t pairs[][2] = {{10, 3}, {12, 4}, {7, 7}, {9, 4}, {100, 1}, {1000, 7}};
  for (const auto& km : pairs) {
    const CyclicalSchedule s{km[0], static_cast<int>(km[1]), 0.5, 1};
    for (int64_t step = 0; step < km[0]; ++step) {
      // Same formula evaluated two ways: agreement to a few ulps.
      EXPECT_NEAR(CyclicalStepSize(s, 0.3, step), PaperStepSize(step + 1, km[0], km[1], 0.3), 1e-15)
          << "K=" << km[0] << " M=" << km[1] << " step=" << step;
    }
  }
}

TEST(CyclicalScheduleTest, StepSizeMatchesNumPy) {
  // NumPy: a0/2*(np.cos(np.pi*np.mod(k-1,L)/L)+1), k = 1..10, K = 10, M = 3 (L = 4), a0 = 0.5.
  const double numpy[] = {0.5, 0.4267766952966369, 0.25, 0.07322330470336313, 0.5,
                          0.4267766952966369, 0.25, 0.07322330470336313, 0.5, 0.4267766952966369};
  const CyclicalSchedule s{10, 3, 0.0, 1};
  EXPECT_EQ(CycleLength(s), 4);
  for (int step = 0; step < 10; ++step) {
    EXPECT_NEAR(CyclicalStepSize(s, 0.5, step), numpy[step], 1e-15);
  }
}

TEST(CyclicalScheduleTest, EveryCycleStartsAtTheBaseAndEndsJustAboveZero) {
  // eq. 1: alpha_k = alpha0 whenever (k - 1) mod L = 0; the last step of a cycle has
  // alpha0 / 2 (1 + cos(pi (L - 1) / L)) = alpha0 sin^2(pi / (2 L)) > 0.
  const CyclicalSchedule s{1200, 4, 0.8, 3};
  const int64_t length = CycleLength(s);
  ASSERT_EQ(length, 300);
  for (int64_t start = 0; start < s.total_steps; start += length) {
    EXPECT_EQ(CyclicalStepSize(s, 0.1, start), 0.1);
    const double last = 0.1 * std::pow(std::sin(M_PI / (2.0 * length)), 2);
    EXPECT_NEAR(CyclicalStepSize(s, 0.1, start + length - 1), last, 1e-12 * last);
    EXPECT_GT(CyclicalStepSize(s, 0.1, start + length - 1), 0.0);
  }
}

// Phase (0 exploration, 1 sampling) and sample steps enumerated with NumPy from r = mod(k-1, L)/L
// >= beta (Zhang et al. 2020 sec. 3) and the sample rule of the header, P0 + (j+1) S // n - 1.
struct ScheduleCase {
  CyclicalSchedule schedule;
  const char* phases;
  std::vector<int64_t> samples;
};

TEST(CyclicalScheduleTest, PhasesAndSampleStepsMatchNumPyEnumeration) {
  const ScheduleCase cases[] = {
      {{20, 4, 0.5, 2}, "00011000110001100011", {3, 4, 8, 9, 13, 14, 18, 19}},
      // L = 17; the last cycle is cut to 16 steps and loses its sample at position 16.
      {{50, 3, 0.3, 4}, "00000011111111111000000111111111110000001111111111",
       {7, 10, 13, 16, 24, 27, 30, 33, 41, 44, 47}},
      // L = 25: 0.28 * 25 rounds to 7.000000000000001, yet r = 7 / 25 == 0.28 is sampling.
      {{50, 2, 0.28, 4}, "00000001111111111111111110000000111111111111111111",
       {10, 15, 19, 24, 35, 40, 44, 49}},
      // L = 3, beta = nextafter(1/3, 1): beta * 3 rounds to 1, yet r = 1 / 3 < beta explores.
      {{6, 2, 0x1.5555555555556p-2, 1}, "001001", {2, 5}},
      // ceil(9 / 4) = 3: eq. 1 as written gives 3 cycles, not 4.
      {{9, 4, 0.0, 1}, "111111111", {2, 5, 8}},
  };
  for (const ScheduleCase& c : cases) {
    const CyclicalSchedule& s = c.schedule;
    ASSERT_TRUE(ValidateCyclicalSchedule(s).ok()) << ValidateCyclicalSchedule(s).ToString();
    std::string phases;
    std::vector<int64_t> samples;
    for (int64_t step = 0; step < s.total_steps; ++step) {
      phases += PhaseOf(s, step) == CyclePhase::kSampling ? '1' : '0';
      if (IsSampleStep(s, step)) {
        samples.push_back(step);
        EXPECT_EQ(PhaseOf(s, step), CyclePhase::kSampling) << "sample step " << step;
      }
    }
    EXPECT_EQ(phases, c.phases) << "K=" << s.total_steps;
    EXPECT_EQ(samples, c.samples) << "K=" << s.total_steps;
    EXPECT_EQ(SampleCount(s), static_cast<int64_t>(c.samples.size())) << "K=" << s.total_steps;
  }
}

TEST(CyclicalScheduleTest, ValidationNamesTheBadField) {
  const auto message = [](CyclicalSchedule s) { return ValidateCyclicalSchedule(s).message(); };
  EXPECT_EQ(message({0, 1, 0.5, 1}).rfind("total_steps:", 0), 0u);
  EXPECT_EQ(message({10, 0, 0.5, 1}).rfind("cycles:", 0), 0u);
  EXPECT_EQ(message({10, 11, 0.5, 1}).rfind("cycles:", 0), 0u);
  EXPECT_EQ(message({10, 2, 1.0, 1}).rfind("exploration_fraction:", 0), 0u);
  EXPECT_EQ(message({10, 2, -0.1, 1}).rfind("exploration_fraction:", 0), 0u);
  EXPECT_EQ(message({10, 2, std::nan(""), 1}).rfind("exploration_fraction:", 0), 0u);
  EXPECT_EQ(message({10, 1, 0.95, 1}).rfind("exploration_fraction:", 0), 0u);  // 9/10 < 0.95
  EXPECT_EQ(message({10, 2, 0.5, 0}).rfind("samples_per_cycle:", 0), 0u);
  EXPECT_EQ(message({10, 2, 0.5, 3}).rfind("samples_per_cycle:", 0), 0u);  // positions 3, 4 only
  // beta = nextafter(1/3, 1) in cycles of 3: only position 2 samples (1/3 < beta in double).
  EXPECT_EQ(message({6, 2, 0x1.5555555555556p-2, 2}).rfind("samples_per_cycle:", 0), 0u);
  EXPECT_TRUE(ValidateCyclicalSchedule({10, 2, 0.5, 2}).ok());
  EXPECT_EQ(ValidateCyclicalSchedule({10, 0, 0.5, 1}).code(), Status::Code::kInvalidInput);
}

TEST(SgmcmcConfigTest, ValidationNamesTheBadField) {
  // Each case breaks one field of the defaults; the message must start with that field's name.
  struct Case {
    const char* field;
    void (*edit)(SgmcmcConfig&);
  };
  const Case cases[] = {
      {"cycles", [](SgmcmcConfig& c) { c.cycles = 0; }},
      {"exploration_fraction", [](SgmcmcConfig& c) { c.exploration_fraction = 1.0; }},
      {"samples_per_cycle", [](SgmcmcConfig& c) { c.samples_per_cycle = 0; }},
      {"temperature", [](SgmcmcConfig& c) { c.temperature = -1.0; }},
      {"temperature", [](SgmcmcConfig& c) { c.temperature = INFINITY; }},
      {"friction", [](SgmcmcConfig& c) { c.friction = 0.0; }},
      {"friction", [](SgmcmcConfig& c) { c.friction = 1.5; }},
  };
  EXPECT_TRUE(ValidateSgmcmcConfig(SgmcmcConfig{}).ok());
  for (const Case& k : cases) {
    SgmcmcConfig c;
    k.edit(c);
    const Status status = ValidateSgmcmcConfig(c);
    EXPECT_EQ(status.code(), Status::Code::kInvalidInput) << k.field;
    EXPECT_EQ(status.message().rfind(std::string(k.field) + ":", 0), 0u) << status.message();
  }
  for (SgmcmcSampler s : {SgmcmcSampler::kSgld, SgmcmcSampler::kSghmc}) {
    EXPECT_EQ(ParseSgmcmcSampler(SgmcmcSamplerName(s)), s);
  }
  EXPECT_FALSE(ParseSgmcmcSampler("hmc").has_value());
}

TEST(SgmcmcStepTest, PlanFollowsTheScheduleAndTheNoiseScaling) {
  SgmcmcConfig c;
  c.cycles = 2;
  c.exploration_fraction = 0.5;
  c.temperature = 0.3;
  c.friction = 0.05;
  const CyclicalSchedule s = CyclicalScheduleFor(c, 40);
  for (SgmcmcSampler sampler : {SgmcmcSampler::kSgld, SgmcmcSampler::kSghmc}) {
    c.sampler = sampler;
    for (int64_t step = 0; step < 40; ++step) {
      const SgmcmcStep p = PlanSgmcmcStep(c, s, 0.2, 1e-3, 500, 9, step);
      const double lr = PaperStepSize(step + 1, 40, 2, 0.2);  // Zhang et al. eq. 1
      EXPECT_FLOAT_EQ(p.lr, static_cast<float>(lr));
      EXPECT_FLOAT_EQ(p.weight_decay, 1e-3f);
      // Welling & Teh 2011 eq. 4 with lr = eps N / 2; Chen et al. 2014 eq. 15 with lr = eta N.
      const double a = sampler == SgmcmcSampler::kSghmc ? 0.05 : 1.0;
      const bool sampling = (step % 20) / 20.0 >= 0.5;
      const double expected = sampling ? std::sqrt(2 * a * lr * 0.3 / 500) : 0.0;
      EXPECT_FLOAT_EQ(p.noise_std, static_cast<float>(expected));
      EXPECT_EQ(p.noise_key, Derive(9, static_cast<uint64_t>(step)));
    }
  }
}

// --- noise and reproducibility -----------------------------------------------------------------

// The noise alone: an SGLD step with lr 0 and noise_std 1 from w = 0 writes xi into w.
std::vector<float> Noise(uint64_t key, int64_t first, int64_t count) {
  SgmcmcStep s;
  s.sampler = SgmcmcSampler::kSgld;
  s.noise_std = 1.0f;
  s.noise_key = key;
  std::vector<float> g(count, 0.0f), w(count, 0.0f);
  SgmcmcEntries(s, first, g.data(), w.data(), nullptr, count);
  return w;
}

TEST(SgmcmcStepTest, NoiseHasStandardNormalMoments) {
  const int n = 200000;
  const std::vector<float> z = Noise(Derive(5, "noise"), 0, n);
  double s1 = 0, s2 = 0, s4 = 0, lag = 0;
  int tail = 0;
  for (int i = 0; i < n; ++i) {
    s1 += z[i];
    s2 += double{z[i]} * z[i];
    s4 += std::pow(double{z[i]}, 4);
    if (std::abs(z[i]) > 1.96) ++tail;
    if (i > 0) lag += double{z[i]} * z[i - 1];
  }
  // 5 standard errors of each estimator for iid N(0, 1): Var z = 1, Var z^2 = 2, Var z^4 =
  // E z^8 - 9 = 96, Var z_i z_{i-1} = 1; the tail P(|z| > 1.96) = 0.0499958 (scipy.stats.norm),
  // a binomial proportion. Neighbours share Philox words, so the lag-1 product checks their
  // independence (Box-Muller's cos and sin of one pair are independent).
  EXPECT_NEAR(s1 / n, 0.0, 5.0 / std::sqrt(n));
  EXPECT_NEAR(s2 / n, 1.0, 5.0 * std::sqrt(2.0 / n));
  EXPECT_NEAR(s4 / n, 3.0, 5.0 * std::sqrt(96.0 / n));
  EXPECT_NEAR(lag / (n - 1), 0.0, 5.0 / std::sqrt(n - 1));
  const double p = 0.04999579029644087;
  EXPECT_NEAR(static_cast<double>(tail) / n, p, 5.0 * std::sqrt(p * (1 - p) / n));
}

TEST(SgmcmcStepTest, SameSeedSameBitsAndEveryStepItsOwnNoise) {
  const std::vector<float> a = Noise(Derive(7, 3), 0, 64), b = Noise(Derive(7, 3), 0, 64);
  const std::vector<float> c = Noise(Derive(7, 4), 0, 64), d = Noise(Derive(8, 3), 0, 64);
  EXPECT_EQ(std::memcmp(a.data(), b.data(), a.size() * sizeof(float)), 0);
  for (size_t i = 0; i < a.size(); ++i) {
    EXPECT_NE(a[i], c[i]) << i;  // another step
    EXPECT_NE(a[i], d[i]) << i;  // another seed
  }
  // Nothing repeats inside one step's noise either (each entry its own draw).
  for (size_t i = 1; i < a.size(); ++i) EXPECT_NE(a[i], a[i - 1]) << i;
}

TEST(SgmcmcStepTest, SplittingTheVectorDoesNotChangeTheBits) {
  // Any cut of the vector into ranges (as threads would take them) gives the same bits.
  const int64_t n = 1003;
  Philox rng(Derive(11, "split"));
  std::vector<float> g(n), w0(n), v0(n);
  for (int64_t i = 0; i < n; ++i) {
    g[i] = static_cast<float>(rng.NextNormal());
    w0[i] = static_cast<float>(rng.NextNormal());
    v0[i] = static_cast<float>(0.01 * rng.NextNormal());
  }
  for (SgmcmcSampler sampler : {SgmcmcSampler::kSgld, SgmcmcSampler::kSghmc}) {
    const SgmcmcStep s{sampler, 0.01f, 1e-3f, 0.1f, 0.05f, Derive(11, 17)};
    std::vector<float> w_whole = w0, v_whole = v0, w_cut = w0, v_cut = v0;
    SgmcmcEntries(s, 0, g.data(), w_whole.data(), v_whole.data(), n);
    const int64_t cuts[] = {0, 1, 6, 501, 502, n};
    for (int c = 0; c + 1 < 6; ++c) {
      SgmcmcEntries(s, cuts[c], g.data() + cuts[c], w_cut.data() + cuts[c], v_cut.data() + cuts[c],
                    cuts[c + 1] - cuts[c]);
    }
    EXPECT_EQ(std::memcmp(w_whole.data(), w_cut.data(), n * sizeof(float)), 0);
    EXPECT_EQ(std::memcmp(v_whole.data(), v_cut.data(), n * sizeof(float)), 0);
  }
}

// --- Gaussian targets ---------------------------------------------------------------------------
// U(theta) = N/2 (theta - mu)^T P (theta - mu): the mean-loss gradient is g = P (theta - mu), and
// the tempered posterior is N(mu, T P^-1 / N). With exact gradients both samplers are linear
// recursions x' = A x + B xi in x = theta - mu (SGHMC: x = (theta - mu, v)), whose stationary
// covariance Sigma solves the discrete Lyapunov equation Sigma = A Sigma A^T + B B^T; it equals
// T P^-1 / N up to O(lr) (the discretisation bias), which the tests resolve.

// Solves Sigma = A Sigma A^T + Q through (I - A (x) A) vec(Sigma) = vec(Q) (column-major vec).
MatrixXd StationaryCovariance(const MatrixXd& a, const MatrixXd& q) {
  const int n = static_cast<int>(a.rows());
  MatrixXd system = MatrixXd::Identity(n * n, n * n);
  for (int i = 0; i < n; ++i)
    for (int j = 0; j < n; ++j)
      for (int k = 0; k < n; ++k)
        for (int l = 0; l < n; ++l) system(j * n + i, l * n + k) -= a(j, l) * a(i, k);
  const VectorXd vec = system.fullPivLu().solve(Eigen::Map<const VectorXd>(q.data(), n * n));
  return Eigen::Map<const MatrixXd>(vec.data(), n, n);
}

// Monte Carlo standard errors, over n draws of the stationary chain, of the sample mean of x_i
// and of the sample mean of x_i x_j (i, j < dims). Long-run variances sum the autocovariances
// Gamma(k) = A^k Sigma: Var(mean x_i) = (Gamma_ii(0) + 2 sum_k>0 Gamma_ii(k)) / n, and for
// Gaussian x (Isserlis 1918) Cov(x_i x_j at t + k, x_i x_j at t) = Gamma_ii(k) Gamma_jj(k) +
// Gamma_ij(k) Gamma_ji(k).
struct StandardErrors {
  VectorXd mean;
  MatrixXd second;
};
StandardErrors ChainStandardErrors(const MatrixXd& a, const MatrixXd& sigma, int dims, int64_t n) {
  VectorXd mean = sigma.diagonal().head(dims);
  MatrixXd second(dims, dims);
  MatrixXd gamma = sigma;
  const auto add = [&](double weight) {
    for (int i = 0; i < dims; ++i)
      for (int j = 0; j < dims; ++j)
        second(i, j) += weight * (gamma(i, i) * gamma(j, j) + gamma(i, j) * gamma(j, i));
  };
  second.setZero();
  add(1.0);
  for (int k = 1; k < 5000; ++k) {  // |eig A| <= 0.9 here: 0.9^5000 underflows
    gamma = a * gamma;
    mean += 2.0 * gamma.diagonal().head(dims);
    add(2.0);
  }
  const double steps = static_cast<double>(n);
  return {(mean / steps).cwiseSqrt(), (second / steps).cwiseSqrt()};
}

// Sample mean of theta - mu and of (theta - mu)(theta - mu)^T over n steps after burn_in, from
// theta = mu, v = 0; step t's noise key is Derive(seed, t).
struct ChainMoments {
  VectorXd mean;
  MatrixXd second;
};
ChainMoments RunOnGaussian(SgmcmcStep step, const MatrixXd& p, const VectorXd& mu, int64_t burn_in,
                           int64_t n, uint64_t seed) {
  const int dims = static_cast<int>(mu.size());
  std::vector<float> w(dims), v(dims, 0.0f), g(dims);
  for (int i = 0; i < dims; ++i) w[i] = static_cast<float>(mu[i]);
  ChainMoments m{VectorXd::Zero(dims), MatrixXd::Zero(dims, dims)};
  std::vector<double> x(dims);  // plain loops: no allocation per step (fast under ASan)
  for (int64_t t = 0; t < burn_in + n; ++t) {
    for (int i = 0; i < dims; ++i) x[i] = w[i] - mu[i];
    for (int i = 0; i < dims; ++i) {
      double gi = 0;
      for (int j = 0; j < dims; ++j) gi += p(i, j) * x[j];
      g[i] = static_cast<float>(gi);
    }
    step.noise_key = Derive(seed, static_cast<uint64_t>(t));
    SgmcmcEntries(step, 0, g.data(), w.data(), v.data(), dims);
    if (t < burn_in) continue;
    for (int i = 0; i < dims; ++i) {
      const double xi = w[i] - mu[i];
      m.mean[i] += xi;
      for (int j = 0; j < dims; ++j) m.second(i, j) += xi * (w[j] - mu[j]);
    }
  }
  m.mean /= static_cast<double>(n);
  m.second /= static_cast<double>(n);
  return m;
}

// Checks the chain's moments against the exact stationary ones at 5 standard errors (a fixed
// seed, so the outcome is deterministic; at 5 SE a correct kernel fails for under 1 seed in 10^6
// per check), and that the O(lr) gap between the exact and the continuous-time covariance is wider
// than that band on the diagonal, so the check tells the discretised sampler from the ideal one.
void ExpectStationaryMoments(const ChainMoments& m, const MatrixXd& exact,
                             const MatrixXd& continuous, const StandardErrors& se) {
  for (int i = 0; i < m.mean.size(); ++i) {
    EXPECT_NEAR(m.mean[i], 0.0, 5.0 * se.mean[i]) << "mean " << i;
    for (int j = 0; j < m.mean.size(); ++j) {
      EXPECT_NEAR(m.second(i, j), exact(i, j), 5.0 * se.second(i, j))
          << "covariance " << i << "," << j;
    }
    EXPECT_GT(std::abs(exact(i, i) - continuous(i, i)), 5.0 * se.second(i, i))
        << "resolution " << i;
  }
}

TEST(SgmcmcStepTest, SgldOnOneDimensionalGaussianHasTheAr1StationaryVariance) {
  // N = 100, T = 1, P = 4, lr = 0.05: theta - mu is AR(1) with rho = 1 - lr P = 0.8 and noise
  // variance 2 lr T / N, so Var = (2 lr T / N) / (1 - rho^2) = T / (N P (1 - lr P / 2))
  // = 0.0027777... (SciPy solve_discrete_lyapunov: 0.00277777777777778), against the posterior's
  // T / (N P) = 0.0025.
  const double n_rows = 100, temperature = 1, p = 4, lr = 0.05;
  const MatrixXd a = MatrixXd::Constant(1, 1, 1 - lr * p);
  const MatrixXd exact = MatrixXd::Constant(1, 1, temperature / (n_rows * p * (1 - lr * p / 2)));
  EXPECT_NEAR(exact(0, 0), 0.00277777777777778, 1e-16);
  const MatrixXd continuous = MatrixXd::Constant(1, 1, temperature / (n_rows * p));
  const SgmcmcStep step{SgmcmcSampler::kSgld, static_cast<float>(lr), 0.0f, 0.0f,
                        static_cast<float>(std::sqrt(2 * lr * temperature / n_rows)), 0};
  const int64_t n = 400000;
  const ChainMoments m = RunOnGaussian(step, MatrixXd::Constant(1, 1, p),
                                       VectorXd::Constant(1, 1.5), 2000, n, Derive(21, "sgld1"));
  ExpectStationaryMoments(m, exact, continuous, ChainStandardErrors(a, exact, 1, n));
}

const MatrixXd& Precision() {  // P of the 2-D target, eigenvalues 2.28 and 0.72
  static const MatrixXd p = (MatrixXd(2, 2) << 2.0, 0.6, 0.6, 1.0).finished();
  return p;
}

TEST(SgmcmcStepTest, SgldOnTwoDimensionalColdGaussianHasTheDiscretisedCovariance) {
  // A = I - lr P, B B^T = (2 lr T / N) I, and A, P commute, so Sigma = (2 lr T / N)(I - A^2)^-1 =
  // (T / N)(P - lr P^2 / 2)^-1; SciPy's solve_discrete_lyapunov gives the same numbers.
  const double n_rows = 50, temperature = 0.5, lr = 0.2;
  const MatrixXd& p = Precision();
  const MatrixXd a = MatrixXd::Identity(2, 2) - lr * p;
  const MatrixXd exact = temperature / n_rows * (p - lr * p * p / 2).inverse();
  const MatrixXd scipy = (MatrixXd(2, 2) << 0.00735384238264493, -0.00357478449156351,
                          -0.00357478449156351, 0.01331181653525078).finished();
  EXPECT_LT((exact - scipy).cwiseAbs().maxCoeff(), 1e-15);
  const MatrixXd noise = 2 * lr * temperature / n_rows * MatrixXd::Identity(2, 2);
  EXPECT_LT((StationaryCovariance(a, noise) - scipy).cwiseAbs().maxCoeff(), 1e-15);
  const MatrixXd continuous = temperature / n_rows * p.inverse();
  const SgmcmcStep step{SgmcmcSampler::kSgld, static_cast<float>(lr), 0.0f, 0.0f,
                        static_cast<float>(std::sqrt(2 * lr * temperature / n_rows)), 0};
  const int64_t n = 400000;
  const ChainMoments m = RunOnGaussian(step, p, (VectorXd(2) << -0.5, 2.0).finished(), 2000, n,
                                       Derive(22, "sgld2"));
  ExpectStationaryMoments(m, exact, continuous, ChainStandardErrors(a, exact, 2, n));
}

// SGHMC's recursion in x = (theta - mu, v): v' = (1 - a) v - lr P (theta - mu) + s xi and
// theta' - mu = (theta - mu) + v', so A = [[I - lr P, (1 - a) I], [-lr P, (1 - a) I]] and
// B = [s I; s I] (one xi moves both), s^2 = 2 a lr T / N (Chen et al. 2014 eq. 15).
MatrixXd SghmcTransition(const MatrixXd& p, double lr, double friction) {
  const int d = static_cast<int>(p.rows());
  const MatrixXd id = MatrixXd::Identity(d, d);
  MatrixXd a(2 * d, 2 * d);
  a << id - lr * p, (1 - friction) * id, -lr * p, (1 - friction) * id;
  return a;
}

TEST(SgmcmcStepTest, SghmcOnTwoDimensionalGaussianHasTheDiscretisedCovariance) {
  const double n_rows = 50, temperature = 1, lr = 0.2, friction = 0.2;
  const MatrixXd& p = Precision();
  const MatrixXd a = SghmcTransition(p, lr, friction);
  const double s2 = 2 * friction * lr * temperature / n_rows;
  MatrixXd q(4, 4);
  const MatrixXd id = MatrixXd::Identity(2, 2);
  q << id, id, id, id;
  const MatrixXd exact = StationaryCovariance(a, s2 * q);
  // SciPy solve_discrete_lyapunov(A, Q), theta block.
  EXPECT_NEAR(exact(0, 0), 1.3446778555548784e-02, 1e-15);
  EXPECT_NEAR(exact(0, 1), -7.2728970552848006e-03, 1e-15);
  EXPECT_NEAR(exact(1, 1), 2.5568273647690123e-02, 1e-15);
  EXPECT_NEAR(exact(2, 2), 5.0066264173170413e-03, 1e-15);  // velocity
  const MatrixXd continuous = temperature / n_rows * p.inverse();
  const SgmcmcStep step{SgmcmcSampler::kSghmc, static_cast<float>(lr), 0.0f,
                        static_cast<float>(friction), static_cast<float>(std::sqrt(s2)), 0};
  const int64_t n = 400000;
  const ChainMoments m = RunOnGaussian(step, p, (VectorXd(2) << -0.5, 2.0).finished(), 2000, n,
                                       Derive(23, "sghmc2"));
  ExpectStationaryMoments(m, exact.topLeftCorner(2, 2), continuous,
                          ChainStandardErrors(a, exact, 2, n));
}

TEST(SgmcmcStepTest, ZeroTemperatureIsDeterministicDescent) {
  // T = 0 in the plan: no noise whatever the seed, and the iterates are those of Chen et al. 2014
  // eq. 15 (SGHMC) and Welling & Teh 2011 eq. 4 (SGLD) without their noise terms, evaluated here
  // in double on U = N/2 P (theta - mu)^2 with weight decay: d = P (theta - mu) + lambda theta.
  const double p = 3, mu = 1.25, decay = 0.01;
  SgmcmcConfig c;
  c.temperature = 0;
  c.exploration_fraction = 0;  // every step in the sampling phase: only T switches noise off
  c.cycles = 1;
  for (SgmcmcSampler sampler : {SgmcmcSampler::kSgld, SgmcmcSampler::kSghmc}) {
    c.sampler = sampler;
    const CyclicalSchedule s = CyclicalScheduleFor(c, 300);
    std::vector<float> runs[2];
    double theta = -0.5, v = 0;
    for (int r = 0; r < 2; ++r) {
      float w = -0.5f, vel = 0.0f;
      for (int64_t t = 0; t < 300; ++t) {
        const SgmcmcStep step = PlanSgmcmcStep(c, s, 0.1, decay, 1000, /*noise_seed=*/r + 1, t);
        ASSERT_EQ(step.noise_std, 0.0f);
        const float g = static_cast<float>(p * (w - mu));
        SgmcmcEntries(step, 0, &g, &w, &vel, 1);
        runs[r].push_back(w);
        if (r > 0) continue;
        const double lr = CyclicalStepSize(s, 0.1, t), d = p * (theta - mu) + decay * theta;
        if (sampler == SgmcmcSampler::kSgld) {
          theta -= lr * d;
        } else {
          v = (1 - c.friction) * v - lr * d;
          theta += v;
        }
        // float against double arithmetic on O(1) values over 300 contracting steps
        EXPECT_NEAR(w, theta, 1e-5) << SgmcmcSamplerName(sampler) << " step " << t;
      }
    }
    EXPECT_EQ(std::memcmp(runs[0].data(), runs[1].data(), runs[0].size() * sizeof(float)), 0);
    // The minimiser of P/2 (theta - mu)^2 + lambda/2 theta^2 is P mu / (P + lambda); the sum of
    // the 300 rates is about 15, so the start's error of 1.75 has shrunk far below 1e-4.
    EXPECT_NEAR(runs[0].back(), p * mu / (p + decay), 1e-4) << SgmcmcSamplerName(sampler);
  }
}

}  // namespace sgmcmc_test
}  // namespace chorus

#include "common/mcmc_diagnostics.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace mcmc_diagnostics_test {

using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

constexpr uint64_t kSeed = 20250302;  // every random draw below derives from it

// Stationary AR(1) chains, x_{t+1} = rho x_t + sqrt(1 - rho^2) e_t, x_0 ~ N(0, 1): chains x n.
MatrixD Ar1Chains(double rho, int chains, int n, uint64_t seed) {
  Philox rng(seed);
  MatrixD draws(chains, n);
  for (int c = 0; c < chains; ++c) {
    double x = rng.NextNormal();
    for (int i = 0; i < n; ++i) {
      draws(c, i) = x;
      x = rho * x + std::sqrt(1.0 - rho * rho) * rng.NextNormal();
    }
  }
  return draws;
}

TEST(McmcDiagnosticsTest, EssOfAr1ChainsMatchesAnalyticValue) {
  // Reference: an AR(1) chain with coefficient rho has integrated autocorrelation time
  // tau = 1 + 2 sum_t rho^t = (1 + rho) / (1 - rho), so ESS = S (1 - rho) / (1 + rho) (e.g.
  // Geyer 1992, Statistical Science 7(4)). rho < 0 checks the antithetic case, ESS > S.
  // Tolerance: the estimator's own spread, measured over 200 seeds of 4 x 2000 draws, has a
  // relative sd of 6.2% (rho 0.5) and 5.3% (rho -0.3) and a mean within 1% of the analytic value;
  // 25% is 4 sds.
  for (double rho : {0.5, -0.3}) {
    const MatrixD draws = Ar1Chains(rho, 4, 2000, Derive(kSeed, "ar1"));
    const double analytic = draws.size() * (1.0 - rho) / (1.0 + rho);
    EXPECT_NEAR(EffectiveSampleSize(draws) / analytic, 1.0, 0.25) << "rho " << rho;
    EXPECT_NEAR(BulkEss(draws) / analytic, 1.0, 0.25) << "rho " << rho;
  }
}

TEST(McmcDiagnosticsTest, RhatIsNearOneForWellMixedChains) {
  // Independent N(0, 1) draws in every chain: R-hat estimates 1. Vehtari et al. (2021) recommend
  // using a sample only when R-hat < 1.01; the sd of split R-hat for 8 split chains of 500 iid
  // draws is ~5e-4 (from (B/N)/W ~ chi^2_7 / (7 * 500)), so 1.01 is ~20 sds away.
  const MatrixD draws = Ar1Chains(0.0, 4, 1000, Derive(kSeed, "iid"));
  EXPECT_LT(SplitRhat(draws), 1.01);
  EXPECT_LT(RankNormalizedRhat(draws), 1.01);
  EXPECT_GT(SplitRhat(draws), 0.99);
}

TEST(McmcDiagnosticsTest, RhatFlagsChainWithShiftedMean) {
  // One chain of four shifted by 2 sds. In the population, the 8 split chains' means have
  // variance (2 * 1.5^2 + 6 * 0.5^2) / 7 = 0.857 and W = 1, so split R-hat
  // = sqrt(1 - 1/500 + 0.857) = 1.362 (the R-hat formula of Gelman & Rubin 1992 on population
  // values). Sampling error of the chain means (sd 0.045) moves it by ~0.03; tolerance 0.1.
  MatrixD draws = Ar1Chains(0.0, 4, 1000, Derive(kSeed, "shift"));
  draws.row(3).array() += 2.0;
  EXPECT_NEAR(SplitRhat(draws), 1.362, 0.1);
  EXPECT_GT(RankNormalizedRhat(draws), 1.1);  // the brief's "clearly above 1.1"
}

TEST(McmcDiagnosticsTest, FoldedRhatFlagsChainWithLargerScale) {
  // Vehtari et al. (2021) motivate folding with chains that agree in location but not in scale:
  // split R-hat on the values compares means only and stays near 1, while the rank-normalised
  // R-hat includes the folded |x - median| and flags it. One chain of four has sd 3: the chains'
  // mean |x| are 0.80 and 2.39 (E|x| = sd sqrt(2/pi)), far apart on the folded scale.
  MatrixD draws = Ar1Chains(0.0, 4, 1000, Derive(kSeed, "scale"));
  draws.row(3) *= 3.0;
  EXPECT_LT(SplitRhat(draws), 1.01);
  EXPECT_GT(RankNormalizedRhat(draws), 1.1);
}

TEST(McmcDiagnosticsTest, MatchesNumpyReferenceOnSmallArrays) {
  // Reference: tests/reference/numpy_mcmc_diagnostics.py, an independent NumPy/SciPy
  // implementation of Vehtari et al. (2021)'s split R-hat, ESS (Geyer's initial monotone
  // sequence), rank normalisation and folding. Both sides compute in double from the same
  // formulas by different routes (FFT autocovariances, numpy.unique ranks, scipy's ndtri), so
  // they agree to rounding; 1e-9 relative.
  std::vector<MatrixD> cases;
  // Odd length (the middle draw is dropped) and values rounded to 0.1, so ranks have ties.
  cases.push_back((Ar1Chains(0.6, 4, 21, Derive(kSeed, "ties")).array() * 10.0).round() / 10.0);
  // Antithetic chains: the ESS reaches the cap S log10 S.
  cases.push_back(Ar1Chains(-0.7, 2, 40, Derive(kSeed, "antithetic")));
  // Slowly mixing chains, one shifted: R-hat far from 1.
  cases.push_back(Ar1Chains(0.9, 3, 30, Derive(kSeed, "shifted")));
  cases.back().row(0).array() += 1.5;
  const std::string dir = MakeTempDir("mcmc-diagnostics");
  std::vector<std::string> paths;
  for (size_t k = 0; k < cases.size(); ++k) {
    paths.push_back(dir + "/draws" + std::to_string(k) + ".txt");
    WriteMatrixText(paths.back(), cases[k]);
  }
  auto ref = ParseReferenceOutput(RunReferenceScript("numpy_mcmc_diagnostics.py", paths));
  for (size_t k = 0; k < cases.size(); ++k) {
    const MatrixD& draws = cases[k];
    const std::pair<const char*, double> ours[] = {{"split_rhat", SplitRhat(draws)},
                                                   {"ess", EffectiveSampleSize(draws)},
                                                   {"rank_rhat", RankNormalizedRhat(draws)},
                                                   {"bulk_ess", BulkEss(draws)}};
    for (const auto& [key, value] : ours) {
      ASSERT_EQ(ref[key].size(), cases.size()) << key;
      EXPECT_NEAR(value, ref[key][k], 1e-9 * std::abs(ref[key][k])) << "case " << k << " " << key;
    }
  }
  EXPECT_NEAR(EffectiveSampleSize(cases[1]), 80 * std::log10(80.0), 1e-9);  // the cap, S = 80
  std::filesystem::remove_all(dir);
}

TEST(McmcDiagnosticsTest, SummaryFindsWorstDimension) {
  // Three dimensions: 0 well mixed, 1 with one chain of three times the scale (the worst R-hat,
  // through folding), 2 strongly autocorrelated (the smallest ESS). SummarizeDraws takes chains
  // as iterations x dim.
  std::vector<MatrixD> chains(4, MatrixD(1000, 3));
  const MatrixD mixed = Ar1Chains(0.0, 4, 1000, Derive(kSeed, "dim0"));
  MatrixD scaled = Ar1Chains(0.0, 4, 1000, Derive(kSeed, "dim1"));
  scaled.row(0) *= 3.0;
  const MatrixD sticky = Ar1Chains(0.9, 4, 1000, Derive(kSeed, "dim2"));
  for (int c = 0; c < 4; ++c) {
    chains[c].col(0) = mixed.row(c).transpose();
    chains[c].col(1) = scaled.row(c).transpose();
    chains[c].col(2) = sticky.row(c).transpose();
  }
  const DrawsSummary summary = SummarizeDraws(chains);
  EXPECT_EQ(summary.max_rhat_dim, 1);
  EXPECT_EQ(summary.max_rhat, RankNormalizedRhat(scaled));
  EXPECT_EQ(summary.min_bulk_ess_dim, 2);
  EXPECT_EQ(summary.min_bulk_ess, BulkEss(sticky));
  // A constant dimension has no within-chain variance: NaN, reported as the worst.
  for (MatrixD& c : chains) c.col(0).setConstant(1.0);
  EXPECT_TRUE(std::isnan(SummarizeDraws(chains).max_rhat));
  EXPECT_EQ(SummarizeDraws(chains).max_rhat_dim, 0);
}

}  // namespace mcmc_diagnostics_test
}  // namespace chorus

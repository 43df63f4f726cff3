// The training-data sketches (common/training_summary.h) and the shift statistics computed from
// them (common/distribution_shift.h), against SciPy's two-sample Kolmogorov-Smirnov statistic
// and the published PSI formula evaluated with NumPy on the raw samples
// (tests/reference/scipy_shift.py).
#include "common/distribution_shift.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include "common/rng.h"
#include "common/training_summary.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace distribution_shift_test {

using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

struct Reference {
  double ks = 0;
  double psi = 0;
};

// scipy.stats.ks_2samp(a, b).statistic and NumPy's PSI of b against a, on the raw samples.
Reference ReferenceShift(const std::vector<double>& a, const std::vector<double>& b) {
  const std::string dir = MakeTempDir("chorus-shift");
  const auto write = [&](const std::string& name, const std::vector<double>& v) {
    MatrixD m(static_cast<int64_t>(v.size()), 1);
    for (size_t i = 0; i < v.size(); ++i) m(static_cast<int64_t>(i), 0) = v[i];
    WriteMatrixText(dir + "/" + name, m);
  };
  write("a.txt", a);
  write("b.txt", b);
  auto out = ParseReferenceOutput(
      RunReferenceScript("scipy_shift.py", {dir + "/a.txt", dir + "/b.txt"}));
  std::filesystem::remove_all(dir);
  if (out["ks"].size() != 1 || out["psi"].size() != 1) {
    ADD_FAILURE() << "reference script printed no ks/psi";
    return {};
  }
  return {out["ks"][0], out["psi"][0]};
}

DistributionSketch Sketch(std::vector<double> values) { return SketchOf(&values); }

// Values that floats hold exactly, so the sketch (float) and the reference (double) see the same
// numbers.
std::vector<double> Integers(int n, int below, double skew, Philox* rng) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) {
    v.push_back(std::floor(std::pow(rng->NextUniform(), skew) * below));
  }
  return v;
}

std::vector<double> Normals(int n, double mean, double sd, double zero_share, Philox* rng) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) {
    const double x = rng->NextUniform() < zero_share ? 0.0 : mean + sd * rng->NextNormal();
    v.push_back(static_cast<float>(x));
  }
  return v;
}

TEST(DistributionShiftTest, PsiOfAHandWorkedPair) {
  // (0.25 - 0.5) ln(0.25 / 0.5) + (0.75 - 0.5) ln(0.75 / 0.5) = 0.25 ln 2 + 0.25 ln 1.5
  //   = 0.27465307216702742 (worked by hand, digits from Python's math.log).
  EXPECT_NEAR(PopulationStabilityIndex({0.5, 0.5}, {0.25, 0.75}), 0.27465307216702742, 1e-15);
  EXPECT_EQ(PopulationStabilityIndex({0.2, 0.3, 0.5}, {0.2, 0.3, 0.5}), 0.0);
  // An empty bin counts as 1e-4: (0.5 - 1e-4) ln(0.5 / 1e-4) + (0.5 - 1) ln(0.5 / 1).
  EXPECT_NEAR(PopulationStabilityIndex({1.0, 0.0}, {0.5, 0.5}),
              (0.5 - 1e-4) * std::log(0.5 / 1e-4) - 0.5 * std::log(0.5), 1e-12);
}

TEST(DistributionShiftTest, CategoryPsiMatchesByNameAndPoolsUnseenCategories) {
  // The other's "c" was never seen: it joins the extra bin, whose reference share is 0 -> 1e-4.
  const double psi = CategoryPsi({"a", "b"}, {0.5, 0.5}, {"b", "c", "a"}, {0.5, 0.25, 0.25});
  const double expected = PopulationStabilityIndex({0.5, 0.5, 0.0}, {0.25, 0.5, 0.25});
  EXPECT_NEAR(psi, expected, 1e-15);
  EXPECT_GT(psi, 0.25);
}

TEST(DistributionShiftTest, SketchOfFewValuesKeepsThemAll) {
  const DistributionSketch s = Sketch({3, 1, 3, 2, 3, 1, 1, 1});
  ASSERT_EQ(s.values, (std::vector<float>{1, 2, 3}));
  EXPECT_EQ(s.below, (std::vector<float>{0, 0.5, 0.625}));
  EXPECT_EQ(s.upto, (std::vector<float>{0.5, 0.625, 1}));
  EXPECT_EQ(s.Cdf(0.5), 0.0);
  EXPECT_EQ(s.Cdf(1), 0.5);
  EXPECT_EQ(s.Cdf(1.5), 0.5);  // no values between kept ones: a step
  EXPECT_EQ(s.CdfBelow(2), 0.5);
  EXPECT_EQ(s.Cdf(2), 0.625);
  EXPECT_EQ(s.CdfBelow(3), 0.625);
  EXPECT_EQ(s.Cdf(3), 1.0);
  EXPECT_EQ(s.Cdf(7), 1.0);
}

TEST(DistributionShiftTest, LargeSketchKeepsHundredQuantilesAndPointMasses) {
  Philox rng(7);
  std::vector<double> v = Normals(20000, 0, 1, 0.5, &rng);
  const DistributionSketch s = Sketch(v);
  EXPECT_LE(s.values.size(), static_cast<size_t>(kSketchExactValues));
  EXPECT_GT(s.values.size(), 40u);
  // The point mass at 0 (half the rows) is kept exactly.
  double below = 0, upto = 0;
  for (double x : v) {
    below += x < 0;
    upto += x <= 0;
  }
  EXPECT_NEAR(s.CdfBelow(0), below / v.size(), 1e-7);
  EXPECT_NEAR(s.Cdf(0), upto / v.size(), 1e-7);
  // Anywhere else the distribution function is within 1/100 + 1/rows of the data's.
  std::sort(v.begin(), v.end());
  for (double x = -3; x <= 3; x += 0.01) {
    const double truth =
        static_cast<double>(std::upper_bound(v.begin(), v.end(), x) - v.begin()) / v.size();
    EXPECT_NEAR(s.Cdf(x), truth, 0.01 + 1.0 / v.size()) << "x = " << x;
  }
}

TEST(DistributionShiftTest, ExactSketchesGiveScipysKsAndNumpysPsi) {
  Philox rng(11);
  // At most 40 distinct values each: both sketches exact.
  const std::vector<double> a = Integers(3000, 40, 1.0, &rng);
  const std::vector<double> b = Integers(2500, 40, 1.4, &rng);
  const Reference ref = ReferenceShift(a, b);
  // Fractions are stored as floats: agreement to float precision.
  EXPECT_NEAR(KolmogorovSmirnov(Sketch(a), Sketch(b)), ref.ks, 1e-6);
  EXPECT_NEAR(SketchPsi(Sketch(a), Sketch(b)), ref.psi, 1e-5);
  EXPECT_GT(ref.ks, 0.05);  // the pair does differ
  // No shift: the same sample.
  EXPECT_EQ(KolmogorovSmirnov(Sketch(a), Sketch(a)), 0.0);
  EXPECT_NEAR(SketchPsi(Sketch(a), Sketch(a)), 0.0, 1e-12);
}

TEST(DistributionShiftTest, QuantileSketchesStayWithinTheirBoundOfScipy) {
  Philox rng(13);
  struct Case {
    std::vector<double> a, b;
  };
  const std::vector<Case> cases = {
      {Normals(5000, 0, 1, 0, &rng), Normals(4000, 0.3, 1.2, 0, &rng)},
      {Normals(5000, 0, 1, 0, &rng), Normals(4000, 0, 1, 0, &rng)},
      {Normals(6000, 2, 1, 0.5, &rng), Normals(3000, 2, 1, 0.7, &rng)},  // point mass at 0 grows
  };
  for (size_t c = 0; c < cases.size(); ++c) {
    SCOPED_TRACE("case " + std::to_string(c));
    const Reference ref = ReferenceShift(cases[c].a, cases[c].b);
    const double n_a = static_cast<double>(cases[c].a.size());
    const double n_b = static_cast<double>(cases[c].b.size());
    // Each sketch's distribution function is within 1/100 + 1/rows of its sample's.
    const double ks_bound = 0.02 + 1 / n_a + 1 / n_b;
    EXPECT_NEAR(KolmogorovSmirnov(Sketch(cases[c].a), Sketch(cases[c].b)), ref.ks, ks_bound);
    // The reference's deciles are kept exactly; only the other's bin shares are interpolated.
    // Not a proven bound: these cases differ from NumPy's PSI by at most 0.0008 (observed).
    EXPECT_NEAR(SketchPsi(Sketch(cases[c].a), Sketch(cases[c].b)), ref.psi, 0.003);
  }
}

}  // namespace distribution_shift_test
}  // namespace chorus

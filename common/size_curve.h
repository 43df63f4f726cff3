// Size curves: how test quality grows with the number of members, with the spread over random
// member subsets, so a user can see what another member buys. Thread safety: free functions.
#pragma once

#include <cstdint>
#include <vector>

#include "common/assembly.h"
#include "common/matrix.h"
#include "common/parallel_for.h"

namespace chorus {

struct Spread {
  double mean = 0, min = 0, max = 0;
};

// One point: k members, s samples per member (1 without basin fits). nll is on test;
// validation_nll on the validation rows the temperature (scale) was tuned on, so it is optimistic
// but is what a choice between configurations may use. Classification fills nll,
// validation_nll, accuracy, ece; regression fills nll, validation_nll, rmse, coverage_90.
struct SizeCurvePoint {
  int members = 0;
  int samples = 1;
  Spread nll, validation_nll, accuracy, ece, rmse, coverage_90;
};

// For k in MemberGrid(M): `subsets` subsets of k distinct members drawn with Philox(seed) (for k = M, or
// when fewer distinct subsets exist, every subset once at most `subsets` times), each assembled
// with uniform weights and a temperature tuned on validation, then scored on test.
// Members given as their samples' outputs: samples[m][s] is member m's sample s (all members must
// have the same number S of samples). The grid is k in MemberGrid(M) members times s in SampleGrid(S)
// samples per member (the first s of each); each point's subsets are drawn as above and each
// subset is the uniform mixture of its k * s components, temperature tuned on validation. The
// subsets are scored through `parallel` (null: one after another); the result is the same.
using MemberSamples = std::vector<std::vector<const Matrix*>>;
using MemberSampleGaussians = std::vector<std::vector<const MemberGaussian*>>;

// {1, 2, 5, 10, 20, 50, ...} up to S, plus S itself; ascending.
std::vector<int> SampleGrid(int samples);

// Every size 1..10, then steps of about a quarter (13, 16, 20, 25, 31, ...), plus M itself;
// ascending. Scoring a subset of k members costs about k, so the curve of a 200-member ensemble
// costs about 1/18 of what every size 1..200 would, and small ensembles keep every size.
std::vector<int> MemberGrid(int members);

std::vector<SizeCurvePoint> ClassificationSizeGrid(
    const MemberSamples& validation_logits, const std::vector<int32_t>& validation_labels,
    const MemberSamples& test_logits, const std::vector<int32_t>& test_labels, int subsets,
    int ece_bins, uint64_t seed, const ParallelFor* parallel = nullptr);

std::vector<SizeCurvePoint> RegressionSizeGrid(
    const MemberSampleGaussians& validation, const std::vector<double>& validation_targets,
    const MemberSampleGaussians& test, const std::vector<double>& test_targets, int subsets,
    uint64_t seed, const ParallelFor* parallel = nullptr);

// One sample per member: the grid's s = 1 row.
std::vector<SizeCurvePoint> ClassificationSizeCurve(
    const std::vector<const Matrix*>& validation_logits, const std::vector<int32_t>& validation_labels,
    const std::vector<const Matrix*>& test_logits, const std::vector<int32_t>& test_labels,
    int subsets, int ece_bins, uint64_t seed);

std::vector<SizeCurvePoint> RegressionSizeCurve(
    const std::vector<const MemberGaussian*>& validation, const std::vector<double>& validation_targets,
    const std::vector<const MemberGaussian*>& test, const std::vector<double>& test_targets,
    int subsets, uint64_t seed);

}  // namespace chorus

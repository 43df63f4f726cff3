// How far one data set's distribution has moved from another's, from their summaries
// (common/training_summary.h): the population stability index and the two-sample
// Kolmogorov-Smirnov statistic.
//
// PSI (Siddiqi 2006, "Credit Risk Scorecards", ch. 8; Yurdakul 2018, "Statistical Properties of
// the Population Stability Index"): with the reference distribution's deciles as bin edges
// (bins (-inf, e1], (e1, e2], ..., (e_m, +inf), edges distinct) and p_i, q_i the reference's and
// the other's fraction in bin i, PSI = sum_i (q_i - p_i) ln(q_i / p_i), each fraction first
// raised to at least kPsiFloor so an empty bin does not give an infinite index. Categories are
// their own bins, plus one for the other's categories the reference never saw. Reading it: below
// 0.1 little change, 0.1 to 0.25 some, above 0.25 a significant shift (common practice in credit
// scoring, not a statistical test).
//
// KS (Kolmogorov 1933, Smirnov 1948): sup_x |F_a(x) - F_b(x)|. Exact when both sketches are
// exact (at most kSketchExactValues distinct values each); otherwise each sketch's distribution
// function is known to within 1/100 + 1/rows between its kept values, and the statistic to within
// the sum of both.
// Thread safety: reentrant free functions.
#pragma once

#include <string>
#include <vector>

#include "common/training_summary.h"

namespace chorus {

constexpr double kPsiFloor = 1e-4;  // smallest bin fraction used in the index (common practice)
constexpr int kPsiBins = 10;        // deciles of the reference

// The distinct reference deciles used as PSI bin edges: for j = 1..9 the smallest kept value v
// with F(v) >= j/10 that is below the maximum. Empty for a one-valued reference (one bin).
std::vector<double> DecileEdges(const DistributionSketch& reference);

// The fraction of `s` in each bin that `edges` (ascending) cut: edges.size() + 1 fractions.
std::vector<double> BinShares(const DistributionSketch& s, const std::vector<double>& edges);

// sum_i (q_i - p_i) ln(q_i / p_i) over equal-length share vectors, each share floored at
// kPsiFloor.
double PopulationStabilityIndex(const std::vector<double>& reference,
                                const std::vector<double>& other);

// PSI of `other` against `reference` on the reference's decile bins. Requires both non-empty.
double SketchPsi(const DistributionSketch& reference, const DistributionSketch& other);

// PSI of categorical shares matched by name: reference_names[i] has reference_shares[i]; the
// other's categories missing from the reference are pooled in one extra bin.
double CategoryPsi(const std::vector<std::string>& reference_names,
                   const std::vector<double>& reference_shares,
                   const std::vector<std::string>& other_names,
                   const std::vector<double>& other_shares);

// sup_x |F_a(x) - F_b(x)| over both sketches' kept values, on each side of every jump.
// Requires both non-empty.
double KolmogorovSmirnov(const DistributionSketch& a, const DistributionSketch& b);

}  // namespace chorus

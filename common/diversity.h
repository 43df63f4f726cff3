// How different an ensemble's components are on test inputs, so a user sees why more members (or
// more samples per member) help or do not: pairwise top-1 disagreement (Fort, Hu &
// Lakshminarayanan 2019, "Deep Ensembles: A Loss Landscape Perspective", prediction disagreement)
// and the mean Kullback-Leibler divergence between components' predictives.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <optional>
#include <vector>

#include "common/assembly.h"
#include "common/matrix.h"
#include "common/size_curve.h"

namespace chorus {

struct DiversityMeasures {
  int components = 0;        // predictives compared (at most kMaxDiversityComponents)
  int64_t pairs = 0;         // unordered pairs averaged over
  // Classification: over pairs, the fraction of inputs whose top-1 class differs (ties go to the
  // lower class index). NaN for regression.
  double disagreement = 0;
  // Over ordered pairs (i, j), i != j, the mean over inputs of KL(p_i || p_j) in nats.
  // Classification: sum_k p_ik ln(p_ik / p_jk); regression: between Gaussians,
  // ln(s_j / s_i) + (s_i^2 + (m_i - m_j)^2) / (2 s_j^2) - 1/2.
  double mean_kl = 0;
};

// Components beyond this many are left out (the first ones are kept): the cost grows with the
// square of the count.
constexpr int kMaxDiversityComponents = 64;

// Diversity between members (each member's own predictive: the mean of its samples'
// probabilities; regression: the Gaussian matching its samples' mixture mean and variance), and
// within members (between the samples of one member, averaged over members; only with > 1 sample).
struct DiversitySummary {
  DiversityMeasures between_members;
  std::optional<DiversityMeasures> within_members;
};

// probs: one inputs x classes matrix per component, rows summing to 1; at least one component.
DiversityMeasures ClassificationDiversity(const std::vector<MatrixD>& probs);
// One Gaussian per component over the same inputs, stddev > 0.
DiversityMeasures RegressionDiversity(const std::vector<MemberGaussian>& components);

// From members' sample outputs at temperature 1: logits (classification) or Gaussians.
DiversitySummary ClassificationDiversitySummary(const MemberSamples& samples);
DiversitySummary RegressionDiversitySummary(const MemberSampleGaussians& samples);

}  // namespace chorus

#include "common/distribution_shift.h"

#include <algorithm>
#include <cmath>
#include <map>

namespace chorus {

std::vector<double> DecileEdges(const DistributionSketch& reference) {
  std::vector<double> edges;
  for (int j = 1; j < kPsiBins; ++j) {
    const double level = static_cast<double>(j) / kPsiBins;
    size_t k = 0;
    // upto is stored as float: compare with the level rounded the same way.
    while (k + 1 < reference.values.size() && reference.upto[k] < static_cast<float>(level)) ++k;
    const double edge = reference.values[k];
    if (edge < reference.max() && (edges.empty() || edge > edges.back())) edges.push_back(edge);
  }
  return edges;
}

std::vector<double> BinShares(const DistributionSketch& s, const std::vector<double>& edges) {
  std::vector<double> shares;
  double below = 0;
  for (double edge : edges) {
    const double at = s.Cdf(edge);
    shares.push_back(at - below);
    below = at;
  }
  shares.push_back(1 - below);
  return shares;
}

double PopulationStabilityIndex(const std::vector<double>& reference,
                                const std::vector<double>& other) {
  double psi = 0;
  for (size_t i = 0; i < reference.size(); ++i) {
    const double p = std::max(reference[i], kPsiFloor);
    const double q = std::max(other[i], kPsiFloor);
    psi += (q - p) * std::log(q / p);
  }
  return psi;
}

double SketchPsi(const DistributionSketch& reference, const DistributionSketch& other) {
  const std::vector<double> edges = DecileEdges(reference);
  return PopulationStabilityIndex(BinShares(reference, edges), BinShares(other, edges));
}

double CategoryPsi(const std::vector<std::string>& reference_names,
                   const std::vector<double>& reference_shares,
                   const std::vector<std::string>& other_names,
                   const std::vector<double>& other_shares) {
  std::map<std::string, size_t> bin;
  for (size_t i = 0; i < reference_names.size(); ++i) bin[reference_names[i]] = i;
  std::vector<double> other(reference_names.size() + 1, 0.0);
  for (size_t i = 0; i < other_names.size(); ++i) {
    const auto found = bin.find(other_names[i]);
    other[found == bin.end() ? reference_names.size() : found->second] += other_shares[i];
  }
  std::vector<double> reference = reference_shares;
  reference.push_back(0);
  return PopulationStabilityIndex(reference, other);
}

double KolmogorovSmirnov(const DistributionSketch& a, const DistributionSketch& b) {
  double d = 0;
  // Both distribution functions are linear between the union of kept values and may jump at
  // them, so the supremum is reached at one of them, from the left or at the value.
  for (const DistributionSketch* s : {&a, &b}) {
    for (float value : s->values) {
      const double x = value;
      d = std::max(d, std::abs(a.Cdf(x) - b.Cdf(x)));
      d = std::max(d, std::abs(a.CdfBelow(x) - b.CdfBelow(x)));
    }
  }
  return d;
}

}  // namespace chorus

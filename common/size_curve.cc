#include "common/size_curve.h"

#include <algorithm>
#include <cassert>
#include <functional>
#include <numeric>

#include "common/parallel_for.h"
#include "common/rng.h"

namespace chorus {
namespace {

using Subset = std::vector<int>;  // member indices, ascending

// Subsets' scores, one entry per subset in each metric that the task fills.
struct SubsetScores {
  std::vector<double> nll, validation_nll, accuracy, ece, rmse, coverage_90;

  void Append(const SubsetScores& more) {
    for (auto [to, from] : {std::pair{&nll, &more.nll}, {&validation_nll, &more.validation_nll},
                            {&accuracy, &more.accuracy}, {&ece, &more.ece}, {&rmse, &more.rmse},
                            {&coverage_90, &more.coverage_90}}) {
      to->insert(to->end(), from->begin(), from->end());
    }
  }
};

// C(n, k) by C(n - k + j, j) = C(n - k + j - 1, j - 1) (n - k + j) / j, or cap + 1 once above cap.
uint64_t CappedBinomial(int n, int k, uint64_t cap) {
  uint64_t c = 1;
  for (int j = 1; j <= k; ++j) {
    c = c * static_cast<uint64_t>(n - k + j) / static_cast<uint64_t>(j);
    if (c > cap) return cap + 1;
  }
  return c;
}

// Every k-subset of {0, ..., n-1}, in lexicographic order.
std::vector<Subset> AllSubsets(int n, int k) {
  std::vector<Subset> out;
  Subset s(k);
  std::iota(s.begin(), s.end(), 0);
  while (true) {
    out.push_back(s);
    int j = k - 1;
    while (j >= 0 && s[j] == n - k + j) --j;
    if (j < 0) return out;
    ++s[j];
    for (int t = j + 1; t < k; ++t) s[t] = s[t - 1] + 1;
  }
}

// Partial Fisher-Yates: for j < k swap slot j with a uniform slot in [j, n); keep slots [0, k).
Subset RandomSubset(int n, int k, Philox* rng) {
  Subset perm(n);
  std::iota(perm.begin(), perm.end(), 0);
  for (int j = 0; j < k; ++j) {
    std::swap(perm[j], perm[j + static_cast<int>(rng->NextBelow(static_cast<uint64_t>(n - j)))]);
  }
  perm.resize(k);
  std::sort(perm.begin(), perm.end());
  return perm;
}

// Every distinct subset once if there are at most `subsets` of them, else `subsets` random ones.
std::vector<Subset> ChooseSubsets(int n, int k, int subsets, Philox* rng) {
  if (CappedBinomial(n, k, subsets) <= static_cast<uint64_t>(subsets)) return AllSubsets(n, k);
  std::vector<Subset> out;
  for (int s = 0; s < subsets; ++s) out.push_back(RandomSubset(n, k, rng));
  return out;
}

// mean = sum v / n, min, max; all zero for no values.
Spread Summarise(const std::vector<double>& v) {
  if (v.empty()) return Spread{};
  const auto [min, max] = std::minmax_element(v.begin(), v.end());
  return Spread{std::accumulate(v.begin(), v.end(), 0.0) / v.size(), *min, *max};
}

// The first `samples` samples of each member in `subset`, as one flat component list.
template <typename T>
std::vector<const T*> Pick(const std::vector<std::vector<const T*>>& all, const Subset& subset,
                           int samples) {
  std::vector<const T*> out;
  for (int m : subset) out.insert(out.end(), all[m].begin(), all[m].begin() + samples);
  return out;
}

template <typename T>
std::vector<std::vector<const T*>> OneSampleEach(const std::vector<const T*>& members) {
  std::vector<std::vector<const T*>> out;
  for (const T* m : members) out.push_back({m});
  return out;
}

// For s in SampleGrid(samples), k = 1..members: scores every chosen subset with
// score(subset, s) and summarises each metric. Subsets for each (k, s) come from one stream, drawn
// first; then every subset is scored, through `parallel` (may be null), into a slot of its own.
std::vector<SizeCurvePoint> SizeGrid(
    int members, int samples, int subsets, uint64_t seed, const ParallelFor* parallel,
    const std::function<void(const Subset&, int, SubsetScores*)>& score) {
  assert(subsets >= 1);
  struct Scoring {
    size_t point;  // index into `curve`
    int samples;
    Subset subset;
  };
  Philox rng(seed);
  std::vector<SizeCurvePoint> curve;
  std::vector<Scoring> scorings;
  for (int s : SampleGrid(samples)) {
    for (int k : MemberGrid(members)) {
      for (Subset& subset : ChooseSubsets(members, k, subsets, &rng)) {
        scorings.push_back({curve.size(), s, std::move(subset)});
      }
      SizeCurvePoint point;
      point.members = k;
      point.samples = s;
      curve.push_back(point);
    }
  }
  std::vector<SubsetScores> scored(scorings.size());
  ParallelForEach(parallel, static_cast<int64_t>(scorings.size()), [&](int64_t i) {
    score(scorings[i].subset, scorings[i].samples, &scored[i]);
  });
  std::vector<SubsetScores> by_point(curve.size());
  for (size_t i = 0; i < scorings.size(); ++i) by_point[scorings[i].point].Append(scored[i]);
  for (size_t p = 0; p < curve.size(); ++p) {
    SizeCurvePoint& point = curve[p];
    const SubsetScores& scores = by_point[p];
    point.nll = Summarise(scores.nll);
    point.validation_nll = Summarise(scores.validation_nll);
    point.accuracy = Summarise(scores.accuracy);
    point.ece = Summarise(scores.ece);
    point.rmse = Summarise(scores.rmse);
    point.coverage_90 = Summarise(scores.coverage_90);
  }
  return curve;
}

}  // namespace

std::vector<int> SampleGrid(int samples) {
  std::vector<int> grid;
  for (int decade = 1; decade <= samples; decade *= 10) {
    for (int step : {1, 2, 5}) {
      if (step * decade < samples) grid.push_back(step * decade);
    }
  }
  grid.push_back(samples);
  return grid;
}

std::vector<int> MemberGrid(int members) {
  constexpr int kEverySizeUpTo = 10;
  std::vector<int> grid;
  for (int k = 1; k <= members; k = k < kEverySizeUpTo ? k + 1 : std::max(k + 1, (k * 5 + 2) / 4)) {
    grid.push_back(k);
  }
  if (grid.empty() || grid.back() != members) grid.push_back(members);
  return grid;
}

std::vector<SizeCurvePoint> ClassificationSizeGrid(
    const MemberSamples& validation_logits, const std::vector<int32_t>& validation_labels,
    const MemberSamples& test_logits, const std::vector<int32_t>& test_labels, int subsets,
    int ece_bins, uint64_t seed, const ParallelFor* parallel) {
  assert(validation_logits.size() == test_logits.size() && !test_logits.empty());
  std::vector<const Matrix*> every_component;
  for (const std::vector<const Matrix*>& member : validation_logits) {
    every_component.insert(every_component.end(), member.begin(), member.end());
  }
  const TemperatureGridTerms grid_terms(every_component, validation_labels, parallel);
  const auto score = [&](const Subset& subset, int samples, SubsetScores* scores) {
    const std::vector<double> weights(subset.size() * samples, 1.0 / (subset.size() * samples));
    const std::vector<const Matrix*> validation_components = Pick(validation_logits, subset, samples);
    const double t = TuneTemperature(validation_components, weights, validation_labels, &grid_terms);
    scores->validation_nll.push_back(
        ScoreClassification(MixtureProbabilities(validation_components, weights, t), validation_labels, ece_bins).nll);
    const ClassificationMetrics metrics = ScoreClassification(
        MixtureProbabilities(Pick(test_logits, subset, samples), weights, t), test_labels, ece_bins);
    scores->nll.push_back(metrics.nll);
    scores->accuracy.push_back(metrics.accuracy);
    scores->ece.push_back(metrics.ece);
  };
  return SizeGrid(static_cast<int>(test_logits.size()), static_cast<int>(test_logits[0].size()),
                  subsets, seed, parallel, score);
}

std::vector<SizeCurvePoint> RegressionSizeGrid(
    const MemberSampleGaussians& validation, const std::vector<double>& validation_targets,
    const MemberSampleGaussians& test, const std::vector<double>& test_targets, int subsets,
    uint64_t seed, const ParallelFor* parallel) {
  assert(validation.size() == test.size() && !test.empty());
  const auto score = [&](const Subset& subset, int samples, SubsetScores* scores) {
    const std::vector<double> weights(subset.size() * samples, 1.0 / (subset.size() * samples));
    const std::vector<const MemberGaussian*> validation_components = Pick(validation, subset, samples);
    const double s = TuneStddevScale(validation_components, weights, validation_targets);
    scores->validation_nll.push_back(
        ScoreRegression(MixtureGaussians(validation_components, weights, s), validation_targets).nll);
    const RegressionMetrics metrics =
        ScoreRegression(MixtureGaussians(Pick(test, subset, samples), weights, s), test_targets);
    scores->nll.push_back(metrics.nll);
    scores->rmse.push_back(metrics.rmse);
    scores->coverage_90.push_back(metrics.coverage_90);
  };
  return SizeGrid(static_cast<int>(test.size()), static_cast<int>(test[0].size()), subsets, seed,
                  parallel, score);
}

std::vector<SizeCurvePoint> ClassificationSizeCurve(
    const std::vector<const Matrix*>& validation_logits,
    const std::vector<int32_t>& validation_labels, const std::vector<const Matrix*>& test_logits,
    const std::vector<int32_t>& test_labels, int subsets, int ece_bins, uint64_t seed) {
  return ClassificationSizeGrid(OneSampleEach(validation_logits), validation_labels,
                                OneSampleEach(test_logits), test_labels, subsets, ece_bins, seed);
}

std::vector<SizeCurvePoint> RegressionSizeCurve(
    const std::vector<const MemberGaussian*>& validation,
    const std::vector<double>& validation_targets, const std::vector<const MemberGaussian*>& test,
    const std::vector<double>& test_targets, int subsets, uint64_t seed) {
  return RegressionSizeGrid(OneSampleEach(validation), validation_targets, OneSampleEach(test),
                            test_targets, subsets, seed);
}

}  // namespace chorus

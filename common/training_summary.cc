#include "common/training_summary.h"

#include <algorithm>
#include <cmath>

#include "common/message_text.h"

namespace chorus {
namespace training_summary_detail {

// The fraction of F between kept values k and k+1 at x (values[k] < x < values[k+1]).
double Between(const DistributionSketch& s, size_t k, double x) {
  const double t = (x - s.values[k]) / (static_cast<double>(s.values[k + 1]) - s.values[k]);
  return s.upto[k] + t * (static_cast<double>(s.below[k + 1]) - s.upto[k]);
}

void AddKept(const std::vector<double>& sorted, float value, DistributionSketch* s) {
  const double n = static_cast<double>(sorted.size());
  // Counts against the stored float, so the fractions describe the value as kept.
  const auto first = std::lower_bound(sorted.begin(), sorted.end(), static_cast<double>(value));
  const auto last = std::upper_bound(first, sorted.end(), static_cast<double>(value));
  s->values.push_back(value);
  s->below.push_back(static_cast<float>(static_cast<double>(first - sorted.begin()) / n));
  s->upto.push_back(static_cast<float>(static_cast<double>(last - sorted.begin()) / n));
}

Status CheckSketch(const DistributionSketch& s, const std::string& place) {
  const size_t n = s.values.size();
  if (n == 0 || n > static_cast<size_t>(kMaxSketchValues) || s.below.size() != n ||
      s.upto.size() != n) {
    return Status::InvalidInput(place + ": expected 1 to " + std::to_string(kMaxSketchValues) +
                                " values with one 'below' and one 'upto' fraction each, found " +
                                std::to_string(n) + ", " + std::to_string(s.below.size()) + ", " +
                                std::to_string(s.upto.size()));
  }
  for (size_t i = 0; i < n; ++i) {
    const bool ordered = std::isfinite(s.values[i]) && (i == 0 || s.values[i - 1] < s.values[i]) &&
                         s.below[i] >= 0 && s.below[i] <= s.upto[i] && s.upto[i] <= 1 &&
                         (i == 0 || s.upto[i - 1] <= s.below[i]);
    if (!ordered) {
      return Status::InvalidInput(place + ": entry " + std::to_string(i) +
                                  " breaks the order (finite ascending values, 0 <= below <= upto "
                                  "<= next below <= 1)");
    }
  }
  if (s.upto.back() != 1.0f) {
    return Status::InvalidInput(place + ": the last 'upto' fraction is " +
                                NumberText(s.upto.back()) + ", expected 1");
  }
  return Status::Ok();
}

Status CheckShares(const std::vector<double>& shares, size_t expected, const std::string& place) {
  if (shares.size() != expected) {
    return Status::InvalidInput(place + ": expected " + std::to_string(expected) +
                                " shares, found " + std::to_string(shares.size()));
  }
  double sum = 0;
  for (double share : shares) {
    if (!(share >= 0 && share <= 1)) {
      return Status::InvalidInput(place + ": a share of " + NumberText(share) +
                                  ", expected a fraction in [0, 1]");
    }
    sum += share;
  }
  if (std::abs(sum - 1) > 1e-4) {
    return Status::InvalidInput(place + ": shares sum to " + NumberText(sum) + ", expected 1");
  }
  return Status::Ok();
}

// Column `c` of the plan, read from the standardised training features starting at `first`.
ColumnSummary SummarizeColumn(const PreparedData& data, const FeaturePlan::Column& c,
                              int64_t first) {
  ColumnSummary out;
  out.name = c.name;
  out.categorical = c.categorical;
  const Matrix& x = data.train.x;
  const std::vector<float>& mean = data.standardizer.mean;
  const std::vector<float>& scale = data.standardizer.scale;
  const auto raw = [&](int64_t r, int64_t j) {
    return static_cast<double>(x(r, j)) * scale[j] + mean[j];
  };
  if (!c.categorical) {
    std::vector<double> values(static_cast<size_t>(x.rows()));
    for (int64_t r = 0; r < x.rows(); ++r) values[static_cast<size_t>(r)] = raw(r, first);
    out.numeric = SketchOf(&values);
    return out;
  }
  const size_t vocabulary = data.plan.categorical[static_cast<size_t>(c.index)].vocabulary.size();
  out.category_shares.assign(vocabulary, 0.0);
  for (int64_t r = 0; r < x.rows(); ++r) {
    for (size_t v = 0; v < vocabulary; ++v) {
      if (raw(r, first + static_cast<int64_t>(v)) > 0.5) out.category_shares[v] += 1;
    }
  }
  for (double& share : out.category_shares) share /= static_cast<double>(x.rows());
  return out;
}

}  // namespace training_summary_detail

double DistributionSketch::Cdf(double x) const {
  if (x < values.front()) return 0;
  const size_t k = static_cast<size_t>(std::upper_bound(values.begin(), values.end(), x) -
                                       values.begin()) - 1;
  if (values[k] == x) return upto[k];
  if (k + 1 == values.size()) return 1;
  return training_summary_detail::Between(*this, k, x);
}

double DistributionSketch::CdfBelow(double x) const {
  const size_t k =
      static_cast<size_t>(std::lower_bound(values.begin(), values.end(), x) - values.begin());
  if (k == values.size()) return 1;
  if (values[k] == x) return below[k];
  if (k == 0) return 0;
  return training_summary_detail::Between(*this, k - 1, x);
}

DistributionSketch SketchOf(std::vector<double>* values) {
  DistributionSketch s;
  std::vector<double>& v = *values;
  if (v.empty()) return s;
  // Rounded to the stored precision first, so counts and kept values agree.
  for (double& x : v) x = static_cast<float>(x);
  std::sort(v.begin(), v.end());
  const size_t n = v.size();
  size_t distinct = 1;
  for (size_t i = 1; i < n && distinct <= kSketchExactValues; ++i) distinct += v[i] != v[i - 1];
  if (distinct <= kSketchExactValues) {
    for (size_t i = 0; i < n; i = static_cast<size_t>(
                                 std::upper_bound(v.begin() + i, v.end(), v[i]) - v.begin())) {
      training_summary_detail::AddKept(v, static_cast<float>(v[i]), &s);
    }
    return s;
  }
  for (int q = 0; q < kSketchExactValues; ++q) {
    // The smallest value with at least q% of the rows at or below it (q = 0: the minimum).
    const double level = static_cast<double>(q) / (kSketchExactValues - 1);
    const size_t rank = static_cast<size_t>(std::ceil(level * static_cast<double>(n)));
    const float value = static_cast<float>(v[rank == 0 ? 0 : std::min(rank, n) - 1]);
    if (s.values.empty() || value > s.values.back()) training_summary_detail::AddKept(v, value, &s);
  }
  return s;
}

TrainingSummary SummarizeTraining(const PreparedData& data, const ParallelFor* parallel) {
  TrainingSummary s;
  s.rows = data.train.rows();
  if (s.rows == 0) return s;
  const std::vector<FeaturePlan::Column>& columns = data.plan.columns;
  const std::vector<int64_t> first = data.plan.FirstFeatures();
  s.columns.resize(columns.size());
  ParallelForEach(parallel, static_cast<int64_t>(columns.size()), [&](int64_t k) {
    s.columns[k] = training_summary_detail::SummarizeColumn(data, columns[k], first[k]);
  });
  if (data.task == Task::kClassification) {
    s.class_shares.assign(data.class_names.size(), 0.0);
    for (int32_t label : data.train.labels) s.class_shares[static_cast<size_t>(label)] += 1;
    for (double& share : s.class_shares) share /= static_cast<double>(s.rows);
  } else {
    std::vector<double> targets(data.train.targets.size());
    for (size_t r = 0; r < targets.size(); ++r) {
      targets[r] = static_cast<double>(data.train.targets[r]) * data.target_scale + data.target_mean;
    }
    s.target = SketchOf(&targets);
  }
  return s;
}

Status CheckTrainingSummary(const TrainingSummary& s, const FeaturePlan& plan, Task task,
                            size_t classes, const std::string& source) {
  const std::string place = source + ": training summary";
  if (s.rows < 1) {
    return Status::InvalidInput(place + ": expected at least one row, found " +
                                std::to_string(s.rows));
  }
  if (s.columns.size() != plan.columns.size()) {
    return Status::InvalidInput(place + ": " + std::to_string(s.columns.size()) +
                                " columns, the feature plan has " +
                                std::to_string(plan.columns.size()));
  }
  for (size_t k = 0; k < s.columns.size(); ++k) {
    const ColumnSummary& c = s.columns[k];
    const FeaturePlan::Column& p = plan.columns[k];
    const std::string where = place + ": column " + std::to_string(k) + " (" + Quoted(p.name) + ")";
    if (c.name != p.name || c.categorical != p.categorical) {
      return Status::InvalidInput(where + ": found " + (c.categorical ? "categorical " : "numeric ") +
                                  Quoted(c.name) + ", expected the plan's " +
                                  (p.categorical ? "categorical" : "numeric") + " column");
    }
    if (c.categorical) {
      CHORUS_RETURN_IF_ERROR(training_summary_detail::CheckShares(
          c.category_shares, plan.categorical[p.index].vocabulary.size(), where));
    } else {
      CHORUS_RETURN_IF_ERROR(training_summary_detail::CheckSketch(c.numeric, where));
    }
  }
  if (task == Task::kClassification) {
    return training_summary_detail::CheckShares(s.class_shares, classes, place + ": class shares");
  }
  return training_summary_detail::CheckSketch(s.target, place + ": target");
}

}  // namespace chorus

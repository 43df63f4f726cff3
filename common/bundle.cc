#include "common/bundle.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "common/conv_front.h"

namespace chorus {
namespace {

constexpr double kWeightSumTolerance = 1e-9;

std::string Text(int64_t n) { return std::to_string(n); }

bool AllFinite(const float* values, size_t n) {
  return std::all_of(values, values + n, [](float v) { return std::isfinite(v); });
}

bool Positive(double v) { return std::isfinite(v) && v > 0; }

Status CheckArchitecture(const Bundle& b, const std::string& source) {
  if (b.widths.size() < 2 || static_cast<int64_t>(b.widths.size()) > kMaxBundleLayers + 1) {
    return Status::InvalidInput(source + ": widths: expected 2 to " + Text(kMaxBundleLayers + 1) +
                                " layer widths, found " + Text(b.widths.size()));
  }
  if (!b.conv.empty()) {
    const std::string problem = CheckConvStages(b.image, b.conv);
    if (!problem.empty()) return Status::InvalidInput(source + ": conv: " + problem);
    const int64_t front_outputs = ConvFront(b.image, b.conv, b.activation).Outputs();
    if (b.widths[0] != front_outputs) {
      return Status::InvalidInput(source + ": widths: the convolution stages give " + Text(front_outputs) +
                                  " features, the first dense layer takes " + Text(b.widths[0]));
    }
  } else if (b.image.size() != 0) {
    return Status::InvalidInput(source + ": an image shape without convolution stages");
  }
  if (BundleParameterCount(b) < 0) {
    return Status::InvalidInput(source + ": widths: expected each width in [1, " +
                                Text(kMaxBundleWidth) + "] and at most " +
                                Text(kMaxBundleParameters) + " parameters in all");
  }
  const int outputs = b.widths.back();
  if (b.task == Task::kClassification &&
      (outputs < 2 || static_cast<size_t>(outputs) != b.class_names.size())) {
    return Status::InvalidInput(source + ": expected one class name per output (at least 2), " +
                                "found " + Text(b.class_names.size()) + " names for " +
                                Text(outputs) + " outputs");
  }
  if (b.task == Task::kRegression && (outputs != 2 || !b.class_names.empty())) {
    return Status::InvalidInput(source +
                                ": a regression network has 2 outputs and no classes, "
                                "found " +
                                Text(outputs) + " outputs");
  }
  return Status::Ok();
}

Status CheckColumns(const Preprocessing& p, const std::string& source) {
  std::set<std::string> names;
  int64_t numeric = 0, categorical = 0;
  for (const FeaturePlan::Column& c : p.plan.columns) {
    if (c.name.empty() || !names.insert(c.name).second) {
      return Status::InvalidInput(source + ": preprocessing: empty or repeated column name \"" +
                                  c.name + "\"");
    }
    // Indices count numeric and categorical columns separately, in column order.
    const int64_t expected = c.categorical ? categorical++ : numeric++;
    const bool named =
        !c.categorical || (expected < static_cast<int64_t>(p.plan.categorical.size()) &&
                           p.plan.categorical[expected].name == c.name);
    if (c.index != expected || !named) {
      return Status::InvalidInput(source + ": preprocessing: column \"" + c.name +
                                  "\" does not match its vocabulary entry");
    }
  }
  if (categorical != static_cast<int64_t>(p.plan.categorical.size())) {
    return Status::InvalidInput(source + ": preprocessing: " + Text(p.plan.categorical.size()) +
                                " vocabularies for " + Text(categorical) + " categorical columns");
  }
  for (const CategoricalColumn& c : p.plan.categorical) {
    if (!std::is_sorted(c.vocabulary.begin(), c.vocabulary.end()) ||
        std::adjacent_find(c.vocabulary.begin(), c.vocabulary.end()) != c.vocabulary.end()) {
      return Status::InvalidInput(source + ": preprocessing: the vocabulary of column \"" + c.name +
                                  "\" is not sorted and distinct");
    }
  }
  if (p.format != "csv" && !(p.format == "idx" && p.plan.categorical.empty())) {
    return Status::InvalidInput(source +
                                ": preprocessing: expected format csv, or idx without "
                                "categorical columns, found \"" +
                                p.format + "\"");
  }
  return Status::Ok();
}

Status CheckPreprocessing(const Bundle& b, const std::string& source) {
  const Preprocessing& p = b.preprocessing;
  CHORUS_RETURN_IF_ERROR(CheckColumns(p, source));
  const int64_t features = p.plan.Features();
  const size_t inputs = static_cast<size_t>(BundleInputs(b));
  if (features != BundleInputs(b) || p.standardizer.mean.size() != inputs ||
      p.standardizer.scale.size() != inputs) {
    return Status::InvalidInput(source + ": preprocessing: the network takes " + Text(inputs) +
                                " features; the columns give " + Text(features) +
                                ", the standardizer " + Text(p.standardizer.mean.size()));
  }
  const std::vector<float>& scale = p.standardizer.scale;
  if (!AllFinite(p.standardizer.mean.data(), inputs) ||
      !std::all_of(scale.begin(), scale.end(), [](float s) { return Positive(s); }) ||
      !std::isfinite(p.target_mean) || !Positive(p.target_scale)) {
    return Status::InvalidInput(source +
                                ": preprocessing: expected finite means and positive "
                                "scales");
  }
  return Status::Ok();
}

// A last-layer Laplace fit: the trained point and factors describing exactly the last layer of
// `widths` (last_layer weights).
Status CheckLaplaceFit(const BasinFit& fit, int64_t parameters, int64_t last_layer, const std::string& where) {
  if (static_cast<int64_t>(fit.mean.size()) != parameters) {
    return Status::InvalidInput(where + ": laplace fit: expected " + Text(parameters) +
                                " parameters, found " + Text(fit.mean.size()));
  }
  CHORUS_RETURN_IF_ERROR(CheckLaplaceFactors(fit, where));
  const LaplaceFactors& f = fit.laplace;
  const int64_t covered = f.form == LaplaceForm::kFull ? f.eigenvectors.rows()
                                                       : f.eigenvectors.rows() * f.outputs;
  if (covered != last_layer) {
    return Status::InvalidInput(where + ": laplace fit covers " + Text(covered) +
                                " weights, the last layer has " + Text(last_layer));
  }
  return Status::Ok();
}

Status CheckFit(const BasinFit& fit, int64_t parameters, const std::string& where) {
  const size_t n = static_cast<size_t>(parameters);
  if (fit.mean.size() != n || fit.variance.size() != n) {
    return Status::InvalidInput(where + ": basin fit: expected " + Text(parameters) +
                                " means and variances, found " + Text(fit.mean.size()) + " and " +
                                Text(fit.variance.size()));
  }
  const int64_t rank = fit.deviations.rows();
  const bool low_rank = fit.method == BasinMethod::kGaussianLowRank;
  if (low_rank ? (rank < 2 || rank > kMaxBundleRank || fit.deviations.cols() != parameters)
               : fit.deviations.size() != 0) {
    return Status::InvalidInput(
        where + ": basin fit: deviations are " + Text(rank) + " x " + Text(fit.deviations.cols()) +
        ", expected " +
        (low_rank ? "2 to " + Text(kMaxBundleRank) + " rows of " + Text(parameters)
                  : std::string("none for gaussian_diag")));
  }
  if (!AllFinite(fit.mean.data(), n) || !AllFinite(fit.deviations.data(), fit.deviations.size()) ||
      !std::all_of(fit.variance.begin(), fit.variance.end(),
                   [](float v) { return std::isfinite(v) && v >= 0; })) {
    return Status::InvalidInput(where + ": basin fit: expected finite values, variances >= 0");
  }
  return Status::Ok();
}

Status CheckMember(const BundleMember& m, int64_t parameters, int64_t last_layer, const std::string& source) {
  const std::string where = source + ": member " + Text(m.index);
  if (!std::isfinite(m.weight) || m.weight < 0) {
    return Status::InvalidInput(where + ": expected a weight >= 0, found " +
                                std::to_string(m.weight));
  }
  if (m.basin.method != BasinMethod::kNone) {
    if (m.sample_seeds.empty() || static_cast<int64_t>(m.sample_seeds.size()) > kMaxBundleSamples) {
      return Status::InvalidInput(where + ": expected 1 to " + Text(kMaxBundleSamples) +
                                  " sample seeds, found " + Text(m.sample_seeds.size()));
    }
    if (m.basin.method == BasinMethod::kLaplaceLastLayer) {
      return CheckLaplaceFit(m.basin, parameters, last_layer, where);
    }
    if (m.basin.method == BasinMethod::kCyclicalSgmcmc) {
      if (static_cast<int64_t>(m.basin.mean.size()) != parameters) {
        return Status::InvalidInput(where + ": collected samples: expected " + Text(parameters) +
                                    " parameters, found " + Text(m.basin.mean.size()));
      }
      return CheckCollectedSamples(m.basin, m.sample_seeds, where);
    }
    return CheckFit(m.basin, parameters, where);
  }
  if (static_cast<int64_t>(m.parameters.size()) != parameters || !m.sample_seeds.empty()) {
    return Status::InvalidInput(where + ": expected " + Text(parameters) +
                                " parameters and no "
                                "sample seeds without a basin fit, found " +
                                Text(m.parameters.size()) + " and " + Text(m.sample_seeds.size()));
  }
  if (!AllFinite(m.parameters.data(), m.parameters.size())) {
    return Status::InvalidInput(where + ": expected finite parameters");
  }
  return Status::Ok();
}

Status CheckEnsemble(const Bundle& b, const std::string& source) {
  if (b.members.empty() || static_cast<int64_t>(b.members.size()) > kMaxBundleMembers) {
    return Status::InvalidInput(source + ": expected 1 to " + Text(kMaxBundleMembers) +
                                " members, found " + Text(b.members.size()));
  }
  if (!Positive(b.temperature) || !Positive(b.basin_scale)) {
    return Status::InvalidInput(source + ": expected a positive temperature and basin scale");
  }
  const int64_t parameters = BundleParameterCount(b);
  const int64_t last_layer = BundleParameterCount({b.widths[b.widths.size() - 2], b.widths.back()});
  double sum = 0;
  for (const BundleMember& m : b.members) {
    CHORUS_RETURN_IF_ERROR(CheckMember(m, parameters, last_layer, source));
    sum += m.weight;
  }
  if (std::abs(sum - 1.0) > kWeightSumTolerance) {
    return Status::InvalidInput(source + ": member weights sum to " + std::to_string(sum) +
                                ", expected 1");
  }
  return Status::Ok();
}

}  // namespace

int64_t BundleParameterCount(const std::vector<int>& widths) {
  int64_t count = 0;
  for (size_t l = 0; l + 1 < widths.size(); ++l) {
    const int64_t in = widths[l], out = widths[l + 1];
    if (in < 1 || out < 1 || in > kMaxBundleWidth || out > kMaxBundleWidth) return -1;
    count += (in + 1) * out;  // at most 2^48 per layer: no overflow
    if (count > kMaxBundleParameters) return -1;
  }
  return count;
}

int64_t BundleParameterCount(const Bundle& b) {
  const int64_t dense = BundleParameterCount(b.widths);
  if (b.conv.empty() || dense < 0) return dense;
  const int64_t front = ConvParameterCount(b.image, b.conv);
  if (front < 0 || dense + front > kMaxBundleParameters) return -1;
  return dense + front;
}

int64_t BundleInputs(const Bundle& b) { return b.conv.empty() ? b.widths[0] : b.image.size(); }

Status CheckBundle(const Bundle& bundle, const std::string& source) {
  CHORUS_RETURN_IF_ERROR(CheckArchitecture(bundle, source));
  CHORUS_RETURN_IF_ERROR(CheckPreprocessing(bundle, source));
  CHORUS_RETURN_IF_ERROR(CheckEnsemble(bundle, source));
  const TrainingSummary& summary = bundle.training_summary;
  const bool present = !summary.empty() || !summary.columns.empty() ||
                       !summary.class_shares.empty() || !summary.target.empty();
  if (!present) return Status::Ok();
  return CheckTrainingSummary(summary, bundle.preprocessing.plan, bundle.task,
                              bundle.class_names.size(), source);
}

}  // namespace chorus

#include "common/memory_estimate.h"

#include <algorithm>
#include <cstdio>
#include <vector>

#include "common/conv_front.h"

namespace chorus {
namespace {

// Parameters of the MLP features -> hidden... -> outputs (weights and biases), and the sum of its
// layer widths.
void NetworkSize(int64_t features, const std::vector<int>& hidden, int64_t outputs,
                 int64_t* parameters, int64_t* widths) {
  int64_t in = features;
  *parameters = 0;
  *widths = features;
  for (const int h : hidden) {
    *parameters += (in + 1) * h;
    *widths += h;
    in = h;
  }
  *parameters += (in + 1) * outputs;
  *widths += outputs;
}

}  // namespace

std::string ByteText(int64_t bytes) {
  const char* units[] = {"B", "KiB", "MiB", "GiB", "TiB", "PiB"};
  double value = static_cast<double>(bytes);
  int unit = 0;
  while (value >= 1024 && unit < 5) {
    value /= 1024;
    ++unit;
  }
  char text[32];
  std::snprintf(text, sizeof text, unit == 0 ? "%.0f %s" : "%.1f %s", value, units[unit]);
  return text;
}

std::string MemoryEstimate::Breakdown() const {
  char parameters_text[32];
  std::snprintf(parameters_text, sizeof parameters_text, "%.3g", static_cast<double>(parameters));
  return ByteText(Total()) + ": training " + ByteText(training_bytes) + " (" +
         std::to_string(members_at_once) + " members at once, " + parameters_text +
         " parameters each), results " + ByteText(results_bytes) + ", data " + ByteText(data_bytes);
}

MemoryEstimate EstimateRunMemory(const Config& config, const PreparedData& data, int members_at_once) {
  const int64_t outputs = data.task == Task::kClassification ? data.classes() : 2;
  std::vector<std::vector<int>> shapes = config.search.hidden;
  shapes.push_back(config.model.hidden);
  MemoryEstimate e;
  e.members_at_once = members_at_once;
  // With convolution stages (valid for the data: CheckModelForData) the dense layers start at
  // their output.
  const ConvFront front = config.model.conv.empty()
                              ? ConvFront()
                              : ConvFront(config.model.image, config.model.conv, config.model.activation);
  const int64_t dense_inputs = front.empty() ? data.features() : front.Outputs();
  int64_t widths = 0;
  for (const std::vector<int>& hidden : shapes) {
    int64_t p = 0, w = 0;
    NetworkSize(dense_inputs, hidden, outputs, &p, &w);
    e.parameters = std::max(e.parameters, p + front.ParameterCount());
    widths = std::max(widths, w);
  }
  const BasinConfig& basin = config.ensemble.basin;
  const int64_t basin_vectors = basin.method == BasinMethod::kGaussianDiag      ? 4
                                : basin.method == BasinMethod::kGaussianLowRank ? 2 * (int64_t{basin.rank} + 2)
                                                                                : 0;
  // A last-layer Laplace fit holds the training rows' last hidden features and, while fitting,
  // about three curvature-sized matrices of doubles (6 floats each); it keeps one in floats.
  int64_t laplace_fit_floats = 0, laplace_kept_floats = 0;
  if (basin.method == BasinMethod::kLaplaceLastLayer) {
    const int64_t last_hidden = config.model.hidden.empty() ? dense_inputs : config.model.hidden.back();
    const int64_t last_layer = (last_hidden + 1) * outputs;
    const bool full = basin.hessian == LaplaceHessian::kFull ||
                      (basin.hessian == LaplaceHessian::kAuto && last_layer <= kMaxExactLaplaceParameters);
    laplace_kept_floats = full ? last_layer * last_layer : (last_hidden + 1) * (last_hidden + 1);
    laplace_fit_floats = 6 * laplace_kept_floats + data.train.rows() * last_hidden;
  }
  // Cyclical SG-MCMC keeps every collected weight vector, and an SGHMC velocity while training.
  const int64_t collected_vectors =
      basin.method == BasinMethod::kCyclicalSgmcmc
          ? int64_t{basin.sgmcmc.cycles} * basin.sgmcmc.samples_per_cycle + 1
          : 0;
  const int64_t per_member_floats = e.parameters * (6 + config.train.parts + basin_vectors + collected_vectors) +
                                    int64_t{config.train.batch_size} * widths * 4 +
                                    front.WorkspaceFloats(config.train.batch_size) + laplace_fit_floats;
  e.training_bytes = int64_t{members_at_once} * per_member_floats * 4;
  const int64_t samples = basin.method == BasinMethod::kNone ? 1
                          : basin.method == BasinMethod::kCyclicalSgmcmc ? collected_vectors - 1
                                                                         : basin.samples;
  const int64_t held_out_rows = data.folds > 0 ? data.train.rows() : data.validation.rows();
  const int64_t result_floats = e.parameters * (1 + basin_vectors / 2 + samples * (collected_vectors > 0)) +
                                laplace_kept_floats +
                                samples * (held_out_rows + data.test.rows()) * outputs;
  e.results_bytes = int64_t{config.ensemble.members} * result_floats * 4;
  const int64_t rows = data.train.rows() + data.validation.rows() + data.test.rows();
  e.data_bytes = 2 * rows * data.features() * 4;
  return e;
}

}  // namespace chorus

#include "coordinator/warm_start.h"

#include <cmath>
#include <filesystem>
#include <optional>
#include <utility>

#include "common/member_training.h"
#include "common/message_text.h"
#include "common/sha256.h"
#include "coordinator/job_runner.h"
#include "coordinator/registry.h"
#include "proto/bundle_codec.h"
#include "proto/spec_codec.h"

namespace chorus {
namespace warm_start_detail {

// A lease reply holds the weights and a few kilobytes of spec.
constexpr int64_t kLeaseReplySpareBytes = 64 << 10;

std::string List(const std::vector<std::string>& names) {
  std::string text = "[";
  for (size_t i = 0; i < names.size() && i < 8; ++i) text += (i ? ", " : "") + Quoted(names[i]);
  return text + (names.size() > 8 ? ", ...]" : "]");
}

std::string WidthList(const std::vector<int>& widths) {
  std::string text = "[";
  for (size_t i = 0; i < widths.size(); ++i) text += (i ? ", " : "") + std::to_string(widths[i]);
  return text + "]";
}

// The bundle file train.warm_start names: the file itself, or a registry's current bundle
// (nullopt when it has none yet).
StatusOr<std::optional<std::string>> BundleFileOf(const std::string& path) {
  if (!std::filesystem::is_directory(path)) return std::optional<std::string>(path);
  CHORUS_RETURN_IF_ERROR(Registry::CheckIsRegistry(path));
  CHORUS_ASSIGN_OR_RETURN(const std::optional<std::string> current, Registry::CurrentIn(path));
  if (!current.has_value()) return std::optional<std::string>();
  return std::optional<std::string>(path + "/versions/" + *current + "/bundle.chorus");
}

// Why the bundle does not fit this run's data and network, or "".
std::string Mismatch(const Bundle& b, const Config& config, const PreparedData& data,
                     const Mlp& net) {
  if (b.task != data.task) {
    return std::string("the bundle is a ") + TaskName(b.task) + " model, this run " + TaskName(data.task);
  }
  if (b.task == Task::kClassification && b.class_names != data.class_names) {
    return "classes differ: the bundle's " + List(b.class_names) + ", this run's training data's " +
           List(data.class_names);
  }
  if (b.preprocessing.format != config.data.format) {
    return "the bundle was trained on " + b.preprocessing.format + " data, this run reads " +
           config.data.format;
  }
  const FeaturePlan& old_plan = b.preprocessing.plan;
  if (old_plan.FeatureNames() != data.plan.FeatureNames()) {
    return "input features differ (columns, their order, or categorical values): the bundle's " +
           List(old_plan.FeatureNames()) + ", this run's " + List(data.plan.FeatureNames());
  }
  if (!b.conv.empty() || !config.model.conv.empty()) {
    return "convolution stages cannot be warm-started (a kernel is shared by every pixel, so a "
           "change of per-pixel standardisation cannot be folded into it)";
  }
  if (b.widths != net.widths() || b.activation != config.model.activation) {
    return "networks differ: the bundle's widths " + WidthList(b.widths) + " (" +
           ActivationName(b.activation) + "), this run's " + WidthList(net.widths()) + " (" +
           ActivationName(config.model.activation) + ")";
  }
  return "";
}

// The weights member `m` starts a new member from.
std::vector<float> TrainedPoint(const BundleMember& m) {
  switch (m.basin.method) {
    case BasinMethod::kNone: return m.parameters;
    case BasinMethod::kCyclicalSgmcmc: {
      const Matrix& s = m.basin.samples;
      return std::vector<float>(s.data() + (s.rows() - 1) * s.cols(), s.data() + s.size());
    }
    default: return m.basin.mean;
  }
}

}  // namespace warm_start_detail

std::vector<float> Restandardized(const Mlp& net, Task task, std::vector<float> params,
                                  const Standardizer& from, float from_target_mean,
                                  float from_target_scale, const Standardizer& to,
                                  float to_target_mean, float to_target_scale) {
  const std::vector<int>& w = net.widths();
  // First layer: z_j = sum_i x_old_i W_ij + b_j with x_old_i = a_i x_new_i + c_i.
  const int64_t inputs = w[0], units = w[1];
  float* weight = params.data() + net.WeightOffset(0);
  float* bias = params.data() + net.BiasOffset(0);
  for (int64_t i = 0; i < inputs; ++i) {
    const double a = static_cast<double>(to.scale[i]) / from.scale[i];
    const double c = (static_cast<double>(to.mean[i]) - from.mean[i]) / from.scale[i];
    for (int64_t j = 0; j < units; ++j) {
      float& wij = weight[i * units + j];
      bias[j] = static_cast<float>(bias[j] + c * wij);
      wij = static_cast<float>(a * wij);
    }
  }
  if (task == Task::kClassification) return params;
  // Last layer, outputs (mean, log-variance) of the standardised target: mean_new = r mean_old +
  // (mu_old - mu_new) / t_new, log-variance_new = log-variance_old + 2 ln r, r = t_old / t_new.
  const int last = net.layers() - 1;
  const int64_t hidden = w[static_cast<size_t>(last)];
  float* out_weight = params.data() + net.WeightOffset(last);
  float* out_bias = params.data() + net.BiasOffset(last);
  const double r = static_cast<double>(from_target_scale) / to_target_scale;
  for (int64_t i = 0; i < hidden; ++i) out_weight[i * 2] = static_cast<float>(r * out_weight[i * 2]);
  out_bias[0] = static_cast<float>(
      r * out_bias[0] + (static_cast<double>(from_target_mean) - to_target_mean) / to_target_scale);
  out_bias[1] = static_cast<float>(out_bias[1] + 2 * std::log(r));
  return params;
}

StatusOr<std::optional<WarmStart>> LoadWarmStart(const Config& config, const PreparedData& data) {
  WarmStart w;
  const std::string& configured = config.train.warm_start;
  StatusOr<std::optional<std::string>> path = warm_start_detail::BundleFileOf(configured);
  if (!path.ok()) return path.status().WithContext("train.warm_start");
  if (!path.value().has_value()) return std::optional<WarmStart>();
  w.path = *path.value();
  StatusOr<BundleFile> file = ReadBundleFile(w.path);
  if (!file.ok()) return file.status().WithContext("train.warm_start");
  w.sha256 = file.value().payload_sha256;
  w.bundle = std::move(file.value().bundle);
  const Mlp net = NetworkFor(config.model, data);
  const std::string problem = warm_start_detail::Mismatch(w.bundle, config, data, net);
  if (!problem.empty()) {
    return Status::InvalidInput("train.warm_start: " + w.path + " does not fit this run: " +
                                problem);
  }
  const int64_t bytes = net.ParameterCount() * int64_t{4} + warm_start_detail::kLeaseReplySpareBytes;
  if (!TrainsInProcess(config) && bytes > kMaxLeaseReplyBytes) {
    return Status::InvalidInput("train.warm_start: " + w.path + ": " +
                                std::to_string(net.ParameterCount()) +
                                " weights per member are too many to send to a worker in one "
                                "lease reply (at most " +
                                std::to_string((kMaxLeaseReplyBytes - warm_start_detail::kLeaseReplySpareBytes) / 4) +
                                "); train in process (cluster.local_workers: 0, no listen)");
  }
  const Preprocessing& p = w.bundle.preprocessing;
  for (const BundleMember& m : w.bundle.members) {
    w.points.push_back(std::make_shared<const std::vector<float>>(Restandardized(
        net, data.task, warm_start_detail::TrainedPoint(m), p.standardizer, p.target_mean,
        p.target_scale, data.standardizer, data.target_mean, data.target_scale)));
  }
  return std::optional<WarmStart>(std::move(w));
}

std::string WarmStartConfigHash(const std::string& config_hash, const WarmStart& w) {
  const std::string text = config_hash + "\nwarm_start " + w.sha256;
  return Sha256Hex(text.data(), text.size());
}

nlohmann::json WarmStartJson(const WarmStart& w) {
  nlohmann::json metrics = nlohmann::json::object();
  for (const auto& [name, value] : w.bundle.test_metrics) metrics[name] = value;
  return {{"path", w.path},
          {"sha256", w.sha256},
          {"run_name", w.bundle.run_name},
          {"members", w.bundle.members.size()},
          {"own_test_metrics", metrics}};
}

}  // namespace chorus

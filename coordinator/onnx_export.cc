#include "coordinator/onnx_export.h"

#include <nlohmann/json.hpp>

#include <limits>
#include <vector>

#include "coordinator/onnx_network.h"
#include "proto/onnx_graph_builder.h"

namespace chorus {
namespace onnx_export_detail {

constexpr int64_t kMaxWeightBytes = std::numeric_limits<int>::max();

// x' = float((x - mean) / scale), in double from the stored float statistics as
// common/feature_encoder.h's StandardizeRow computes it.
std::string Standardize(OnnxGraphBuilder& g, const Standardizer& s, const std::string& features) {
  const int64_t f = static_cast<int64_t>(s.mean.size());
  const std::vector<double> mean(s.mean.begin(), s.mean.end()), scale(s.scale.begin(), s.scale.end());
  const std::string x = g.Node("Cast", {features}, {OnnxAttribute::Int("to", static_cast<int>(OnnxType::kDouble))});
  const std::string centred = g.Node("Sub", {x, g.DoubleConstant("feature_mean", {f}, mean)});
  const std::string z = g.Node("Div", {centred, g.DoubleConstant("feature_scale", {f}, scale)});
  return g.Node("Cast", {z}, {OnnxAttribute::Int("to", static_cast<int>(OnnxType::kFloat))});
}

// Every component's outputs stacked along a new first axis and cast to double: [C, N, outputs].
std::string StackedOutputs(OnnxGraphBuilder& g, const Predictor& p, const std::string& x) {
  std::vector<std::string> parts;
  for (int64_t c = 0; c < p.Components(); ++c) {
    const std::string z = AddOnnxNetwork(g, p.network(), p.ComponentParameters(c).data(), x);
    parts.push_back(g.Node("Unsqueeze", {z, g.Int64Constant("axis0", {0})}));
  }
  const std::string stacked = g.Node("Concat", parts, {OnnxAttribute::Int("axis", 0)});
  return g.Node("Cast", {stacked}, {OnnxAttribute::Int("to", static_cast<int>(OnnxType::kDouble))});
}

// The component weights w_c as a double tensor of `dims` (C followed by ones, to broadcast).
std::string Weights(OnnxGraphBuilder& g, const Predictor& p, const std::vector<int64_t>& dims) {
  std::vector<double> w;
  for (int64_t c = 0; c < p.Components(); ++c) w.push_back(p.ComponentWeight(c));
  return g.DoubleConstant("component_weight", dims, w);
}

std::string Scalar(OnnxGraphBuilder& g, const std::string& hint, double v) {
  return g.DoubleConstant(hint, {}, {v});
}

// sum over axis 0 of a [C, ...] tensor, that axis dropped; `output` names the result.
std::string SumOverComponents(OnnxGraphBuilder& g, const std::string& v, const std::string& output = "") {
  return g.Node("ReduceSum", {v, g.Int64Constant("axis0", {0})}, {OnnxAttribute::Int("keepdims", 0)}, output);
}

// probabilities = sum_c w_c softmax(z_c / T) (common/assembly.h MixtureProbabilities).
void AddClassification(OnnxGraphBuilder& g, const Predictor& p, const std::string& z, int64_t k) {
  const std::string tempered = g.Node("Div", {z, Scalar(g, "temperature", p.temperature())});
  const std::string probs = g.Node("Softmax", {tempered}, {OnnxAttribute::Int("axis", -1)});
  const std::string weighted = g.Node("Mul", {probs, Weights(g, p, {p.Components(), 1, 1})});
  SumOverComponents(g, weighted, "probabilities");
  g.AddOutput("probabilities", OnnxType::kDouble, {OnnxGraphBuilder::kBatch, k},
              "calibrated class probabilities, one column per class in the bundle's order");
}

// Component c: mean mu_c = z0 * target_scale + target_mean, stddev s_c = exp(z1 / 2) *
// target_scale * T (common/evaluation.h ToGaussian, common/assembly.h MixtureGaussians); then
// mean = sum_c w_c mu_c and variance = sum_c w_c (s_c^2 + (mu_c - mean)^2)
// (common/uncertainty.h SplitVariance: aleatoric + epistemic).
void AddRegression(OnnxGraphBuilder& g, const Predictor& p, const Preprocessing& pre, const std::string& z) {
  const std::string ts = Scalar(g, "target_scale", pre.target_scale);
  const std::string mu = g.Node("Gather", {z, g.Int64Scalar("mean_column", 0)}, {OnnxAttribute::Int("axis", 2)});
  const std::string log_var = g.Node("Gather", {z, g.Int64Scalar("log_variance_column", 1)}, {OnnxAttribute::Int("axis", 2)});
  const std::string mu_c = g.Node("Add", {g.Node("Mul", {mu, ts}), Scalar(g, "target_mean", pre.target_mean)});
  const std::string sd = g.Node("Exp", {g.Node("Mul", {log_var, Scalar(g, "half", 0.5)})});
  const std::string sd_c = g.Node("Mul", {g.Node("Mul", {sd, ts}), Scalar(g, "temperature", p.temperature())});
  const std::string w = Weights(g, p, {p.Components(), 1});
  const std::string mean = SumOverComponents(g, g.Node("Mul", {mu_c, w}), "mean");
  const std::string dev = g.Node("Sub", {mu_c, mean});
  const std::string spread = g.Node("Add", {g.Node("Mul", {sd_c, sd_c}), g.Node("Mul", {dev, dev})});
  SumOverComponents(g, g.Node("Mul", {spread, w}), "variance");
  g.AddOutput("mean", OnnxType::kDouble, {OnnxGraphBuilder::kBatch}, "predictive mean, target units");
  g.AddOutput("variance", OnnxType::kDouble, {OnnxGraphBuilder::kBatch},
              "predictive variance (aleatoric + epistemic), target units squared");
}

OnnxModelInfo Info(const BundleFile& file, const Predictor& p) {
  const Bundle& b = file.bundle;
  OnnxModelInfo info;
  info.producer_version = CHORUS_VERSION;
  info.doc_string = "chorus ensemble of run '" + b.run_name + "': " + std::to_string(p.Components()) +
                    " weighted network samples combined into one calibrated " + TaskName(b.task) +
                    " predictive (temperature " + std::to_string(b.temperature) +
                    "). Input: encoded features before standardisation, in the order of "
                    "metadata feature_names.";
  info.metadata = {{"task", TaskName(b.task)},
                   {"feature_names", nlohmann::json(b.preprocessing.plan.FeatureNames()).dump()},
                   {"class_names", nlohmann::json(b.class_names).dump()},
                   {"run_name", b.run_name},
                   {"bundle_sha256", file.payload_sha256},
                   {"bundle_chorus_version", b.chorus_version},
                   {"exported_by", std::string("chorus ") + CHORUS_VERSION},
                   {"components", std::to_string(p.Components())},
                   {"temperature", nlohmann::json(b.temperature).dump()}};
  return info;
}

}  // namespace onnx_export_detail

StatusOr<std::string> OnnxModelBytes(const BundleFile& file, const Predictor& predictor) {
  namespace d = onnx_export_detail;
  const int64_t weight_bytes = predictor.Components() * predictor.network().ParameterCount() * 4;
  if (weight_bytes > d::kMaxWeightBytes) {
    return Status::InvalidInput("the bundle's " + std::to_string(predictor.Components()) +
                                " samples hold " + std::to_string(weight_bytes) +
                                " bytes of weights, over the 2 GiB one ONNX file (one Protobuf "
                                "message) can hold");
  }
  const Bundle& b = file.bundle;
  OnnxGraphBuilder g("chorus_ensemble");
  const int64_t features = predictor.Features();
  g.AddInput("features", OnnxType::kFloat, {OnnxGraphBuilder::kBatch, features},
             "encoded features before standardisation, in the order of metadata feature_names");
  const std::string x = d::Standardize(g, b.preprocessing.standardizer, "features");
  const std::string z = d::StackedOutputs(g, predictor, x);
  if (b.task == Task::kClassification) {
    d::AddClassification(g, predictor, z, predictor.Outputs());
  } else {
    d::AddRegression(g, predictor, b.preprocessing, z);
  }
  return g.Finish(d::Info(file, predictor));
}

}  // namespace chorus

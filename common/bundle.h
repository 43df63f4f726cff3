// The bundle: everything needed to predict with a finished run's ensemble, as plain values —
// preprocessing, architecture, each member's weights or basin fit with its sample seeds, member
// weights, temperature, and where it came from. The file format (magic, version, Protobuf
// payload, SHA-256) lives in proto/bundle_codec.h and docs/bundle_format.md; prediction in
// common/predictor.h. Thread safety: plain values; CheckBundle is reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "common/basin_fit.h"
#include "common/config.h"
#include "common/feature_encoder.h"
#include "common/status.h"
#include "common/training_summary.h"

namespace chorus {

// Limits a bundle must respect; CheckBundle refuses anything beyond them before any allocation
// that depends on the dimensions read.
constexpr int64_t kMaxBundleWidth = int64_t{1} << 24;       // units in any layer
constexpr int64_t kMaxBundleLayers = 256;                   // linear layers
constexpr int64_t kMaxBundleParameters = int64_t{1} << 31;  // floats per network
constexpr int64_t kMaxBundleMembers = 100000;
constexpr int64_t kMaxBundleSamples = 10000;  // per member
constexpr int64_t kMaxBundleRank = 1000;      // low-rank deviation vectors

// How raw inputs become the network's features (common/feature_encoder.h).
struct Preprocessing {
  std::string format = "csv";  // the training data's format: "csv" or "idx"
  std::string target;          // csv: the target column's name (ignored if present at predict)
  FeaturePlan plan;            // input columns in training order, vocabularies
  Standardizer standardizer;   // one mean and scale per feature
  float target_mean = 0.0f;    // regression: y = y' * target_scale + target_mean
  float target_scale = 1.0f;
};

// One member. Without a basin fit (basin.method == kNone) its single sample is `parameters`, the
// trained point. With one, `parameters` is empty and sample s is
// DrawBasinSample(basin, sample_seeds[s], Bundle::basin_scale).
struct BundleMember {
  int index = 0;      // position in the run, 0-based
  uint64_t seed = 0;  // Derive(run.seed, index)
  double weight = 0;  // ensemble weight; a member's samples share it equally
  std::vector<float> parameters;
  BasinFit basin;
  std::vector<uint64_t> sample_seeds;

  int64_t Samples() const {
    return basin.method == BasinMethod::kNone ? 1 : static_cast<int64_t>(sample_seeds.size());
  }
};

struct Bundle {
  Task task = Task::kClassification;
  std::vector<std::string> class_names;  // classification: one per output, in output order
  Preprocessing preprocessing;
  std::vector<int> widths;  // dense {inputs, hidden..., outputs} (common/mlp.h)
  Activation activation = Activation::kRelu;
  // Convolution stages before the dense layers (common/conv_front.h), and the input image they
  // read; with stages, widths[0] is their output size. Both empty without stages.
  ImageShape image;
  std::vector<ConvStage> conv;
  std::vector<BundleMember> members;
  double basin_scale = 1.0;  // multiplies every basin fit's covariance
  double temperature = 1.0;  // classification: logits / T; regression: stddev * T
  // Provenance, shown by `chorus inspect`.
  std::string run_name;
  std::string chorus_version;
  std::string data_hash;    // SHA-256 hex of the prepared data
  std::string config_hash;  // SHA-256 hex of the resolved config
  // The run's ensemble test scores: accuracy, nll, brier, ece; or rmse, nll, coverage_90.
  std::vector<std::pair<std::string, double>> test_metrics;
  // The training data's summary (common/training_summary.h); empty in bundles written before
  // chorus kept one, which then skip the shift checks.
  TrainingSummary training_summary;
};

// Parameters of a network with these widths, or -1 if a width or the total is out of bounds.
int64_t BundleParameterCount(const std::vector<int>& widths);
// Parameters of the bundle's network (front and dense layers), or -1 as above.
int64_t BundleParameterCount(const Bundle& b);
// The features the bundle's network reads: the image's size with stages, else widths[0].
int64_t BundleInputs(const Bundle& b);

// Checks that a bundle can be used: every dimension within the limits above and consistent with
// the others (features, classes, parameter counts, deviations, standardizer, vocabularies sorted
// and distinct), every float finite, variances >= 0, weights >= 0 summing to 1 (within 1e-9),
// temperature, basin scale and target scale > 0. Reads only sizes and values already held; it
// allocates nothing that grows with a dimension it checks. Errors are kInvalidInput naming
// `source` and the field.
Status CheckBundle(const Bundle& bundle, const std::string& source);

}  // namespace chorus

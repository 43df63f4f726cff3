#include "tests/testing/synthetic_bundle.h"

#include "common/conv_front.h"
#include "common/rng.h"
#include "common/sha256.h"

namespace chorus::testing {
namespace {

std::vector<float> Normal(Philox& rng, int64_t n, double sd) {
  std::vector<float> v(static_cast<size_t>(n));
  for (float& x : v) x = static_cast<float>(sd * rng.NextNormal());
  return v;
}

Preprocessing SyntheticPreprocessing(const SyntheticBundleSpec& spec, Philox& rng) {
  Preprocessing p;
  p.target = "y";
  for (int j = 0; j < spec.numeric_columns; ++j) {
    p.plan.columns.push_back({"x" + std::to_string(j), false, j});
  }
  if (spec.categorical_column) {
    p.plan.columns.push_back({"site", true, 0});
    p.plan.categorical.push_back({"site", {"east", "north", "west"}});
  }
  for (int64_t j = 0; j < p.plan.Features(); ++j) {
    p.standardizer.mean.push_back(static_cast<float>(rng.NextNormal()));
    p.standardizer.scale.push_back(static_cast<float>(0.5 + rng.NextUniform()));
  }
  p.target_mean = 10.0f;
  p.target_scale = 2.5f;
  return p;
}

BundleMember SyntheticMember(int index, BasinMethod method, int64_t parameters,
                             const SyntheticBundleSpec& spec, Philox& rng) {
  BundleMember m;
  m.index = index;
  m.seed = Derive(spec.seed, static_cast<uint64_t>(index));
  if (method == BasinMethod::kNone) {
    m.parameters = Normal(rng, parameters, 0.3);
    return m;
  }
  m.basin.method = method;
  m.basin.mean = Normal(rng, parameters, 0.3);
  for (int s = 0; s < spec.samples; ++s) m.sample_seeds.push_back(Derive(m.seed, s));
  if (method == BasinMethod::kLaplaceLastLayer) {
    // An exact fit over the last layer: random eigenvectors (a valid factor need not be
    // orthogonal) and eigenvalues in [0, 4).
    LaplaceFactors& f = m.basin.laplace;
    f.form = LaplaceForm::kFull;
    f.outputs = spec.task == Task::kClassification ? spec.classes : 2;
    f.prior_precision = 2.0;
    const int64_t p = (spec.hidden.back() + 1) * f.outputs;
    f.eigenvectors.resize(p, p);
    for (int64_t i = 0; i < f.eigenvectors.size(); ++i) f.eigenvectors.data()[i] = static_cast<float>(rng.NextNormal());
    for (int64_t i = 0; i < p; ++i) f.eigenvalues.push_back(static_cast<float>(4.0 * rng.NextUniform()));
    return m;
  }
  for (int64_t i = 0; i < parameters; ++i) {
    m.basin.variance.push_back(static_cast<float>(0.01 * rng.NextUniform()));
  }
  if (method == BasinMethod::kGaussianLowRank) {
    m.basin.deviations.resize(spec.rank, parameters);
    for (int64_t i = 0; i < m.basin.deviations.size(); ++i) {
      m.basin.deviations.data()[i] = static_cast<float>(0.05 * rng.NextNormal());
    }
  }
  return m;
}

}  // namespace

Bundle SyntheticBundle(const SyntheticBundleSpec& spec) {
  Philox rng(spec.seed);
  Bundle b;
  b.task = spec.task;
  b.preprocessing = SyntheticPreprocessing(spec, rng);
  b.activation = spec.activation;
  b.image = spec.image;
  b.conv = spec.conv;
  b.widths = {static_cast<int>(spec.conv.empty() ? b.preprocessing.plan.Features()
                                                 : ConvFront(spec.image, spec.conv, spec.activation).Outputs())};
  b.widths.insert(b.widths.end(), spec.hidden.begin(), spec.hidden.end());
  b.widths.push_back(spec.task == Task::kClassification ? spec.classes : 2);
  for (int k = 0; spec.task == Task::kClassification && k < spec.classes; ++k) {
    b.class_names.push_back("class " + std::to_string(k));
  }
  std::vector<BasinMethod> methods = {BasinMethod::kNone};
  methods.insert(methods.end(), spec.basins.begin(), spec.basins.end());
  const int64_t parameters = BundleParameterCount(b);
  double total = 0;
  for (size_t m = 0; m < methods.size(); ++m) {
    b.members.push_back(SyntheticMember(static_cast<int>(m), methods[m], parameters, spec, rng));
    total += static_cast<double>(m + 1);
  }
  for (size_t m = 0; m < methods.size(); ++m) b.members[m].weight = (m + 1) / total;
  b.temperature = 1.3;
  b.run_name = "synthetic";
  b.chorus_version = "test";
  b.data_hash = std::string(64, 'd');
  b.config_hash = std::string(64, 'c');
  b.test_metrics = {{"nll", 0.5}};
  return b;
}

std::string FrameBundlePayload(const std::string& payload, uint32_t version) {
  std::string bytes(
      "\x89"
      "CHORUS\n",
      8);
  for (int i = 0; i < 4; ++i) bytes += static_cast<char>((version >> (8 * i)) & 0xFF);
  const uint64_t length = payload.size();
  for (int i = 0; i < 8; ++i) bytes += static_cast<char>((length >> (8 * i)) & 0xFF);
  return bytes + payload + Sha256Hex(payload.data(), payload.size());
}

Matrix RandomInputs(int64_t rows, int64_t features, uint64_t seed) {
  Philox rng(seed);
  Matrix x(rows, features);
  for (int64_t i = 0; i < x.size(); ++i) x.data()[i] = static_cast<float>(rng.NextNormal());
  return x;
}

}  // namespace chorus::testing

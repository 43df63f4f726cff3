#include "coordinator/bundle_writer.h"

#include "proto/bundle_codec.h"

namespace chorus {

Preprocessing RunPreprocessing(const DataConfig& config, const PreparedData& data) {
  Preprocessing p;
  p.format = config.format;
  p.target = config.format == "csv" ? config.target : "";
  p.plan = data.plan;
  p.standardizer = data.standardizer;
  p.target_mean = data.target_mean;
  p.target_scale = data.target_scale;
  return p;
}

namespace {

BundleMember RunMember(const MemberResult& r, double weight) {
  BundleMember m;
  m.index = r.index;
  m.seed = r.seed;
  m.weight = weight;
  if (r.basin.method == BasinMethod::kNone) {
    m.parameters = r.parameters;
  } else {
    m.basin = r.basin;
    m.sample_seeds = r.sample_seeds;
  }
  return m;
}

std::vector<std::pair<std::string, double>> TestMetrics(const EnsembleEvaluation& ev) {
  if (ev.task == Task::kClassification) {
    const ClassificationMetrics& c = ev.test.classification;
    return {{"accuracy", c.accuracy}, {"nll", c.nll}, {"brier", c.brier}, {"ece", c.ece}};
  }
  const RegressionMetrics& r = ev.test.regression;
  return {{"rmse", r.rmse}, {"nll", r.nll}, {"coverage_90", r.coverage_90}};
}

}  // namespace

Bundle MakeRunBundle(const Config& config, const PreparedData& data,
                     const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                     const std::string& config_hash, const TrainingSummary& summary) {
  Bundle b;
  b.task = data.task;
  b.class_names = data.class_names;
  b.preprocessing = RunPreprocessing(config.data, data);
  b.widths = NetworkFor(config.model, data).widths();
  b.activation = config.model.activation;
  b.image = config.model.conv.empty() ? ImageShape() : config.model.image;
  b.conv = config.model.conv;
  for (size_t m = 0; m < members.size(); ++m)
    b.members.push_back(RunMember(members[m], ev.weights[m]));
  b.basin_scale = config.ensemble.basin.scale;
  b.temperature = ev.temperature;
  b.run_name = config.run.name;
  b.chorus_version = CHORUS_VERSION;
  b.data_hash = data.hash;
  b.config_hash = config_hash;
  b.test_metrics = TestMetrics(ev);
  b.training_summary = summary;
  return b;
}

Status WriteRunBundle(const std::string& path, const Config& config, const PreparedData& data,
                      const std::vector<MemberResult>& members, const EnsembleEvaluation& ev,
                      const std::string& config_hash, const TrainingSummary& summary) {
  return WriteBundleFile(path, MakeRunBundle(config, data, members, ev, config_hash, summary));
}

}  // namespace chorus

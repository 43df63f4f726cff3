#include "coordinator/config_loader.h"

#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <filesystem>
#include <functional>
#include <limits>
#include <set>
#include <sstream>

#include "common/conv_front.h"
#include "common/file_util.h"
#include "common/sha256.h"

namespace chorus {
namespace {

// Reads one YAML mapping, checking that every key is known and every value has the right type.
class Section {
 public:
  Section(const YAML::Node& node, std::string name, const std::string& file)
      : node_(node), name_(std::move(name)), file_(file) {}

  // Fails unless the node is a mapping whose keys are all in `allowed`.
  Status Check(const std::set<std::string>& allowed) const {
    if (!node_.IsMap()) return Error(node_, name_, "expected a mapping");
    for (const auto& kv : node_) {
      const std::string key = kv.first.Scalar();
      if (!allowed.count(key)) {
        std::string known;
        for (const auto& a : allowed) known += (known.empty() ? "" : ", ") + a;
        return Error(kv.first, Path(key), "unknown key (known keys: " + known + ")");
      }
    }
    return Status::Ok();
  }

  bool Has(const std::string& key) const { return node_[key].IsDefined() && !node_[key].IsNull(); }
  YAML::Node Node(const std::string& key) const { return node_[key]; }
  std::string Path(const std::string& key) const { return name_.empty() ? key : name_ + "." + key; }
  Section Child(const std::string& key) const { return Section(node_[key], Path(key), file_); }
  // Item i of the list at `key`, as a section named key[i].
  Section Item(const std::string& key, size_t i) const {
    return Section(node_[key][i], Path(key) + "[" + std::to_string(i) + "]", file_);
  }

  template <typename T>
  Status Get(const std::string& key, T* out, const char* expected, T lo, T hi) const {
    if (!Has(key)) return Status::Ok();
    const YAML::Node n = node_[key];
    T v{};
    if (!n.IsScalar() || !YAML::convert<T>::decode(n, v)) {
      return Error(n, Path(key), std::string("expected ") + expected + ", found " + Show(n));
    }
    if (!(v >= lo && v <= hi)) {
      return Error(n, Path(key), std::string("expected ") + expected + " in [" + Num(lo) + ", " +
                                     Num(hi) + "], found " + n.Scalar());
    }
    *out = v;
    return Status::Ok();
  }

  Status GetString(const std::string& key, std::string* out) const {
    if (!Has(key)) return Status::Ok();
    const YAML::Node n = node_[key];
    if (!n.IsScalar()) return Error(n, Path(key), "expected a string, found " + Show(n));
    *out = n.Scalar();
    return Status::Ok();
  }

  Status GetBool(const std::string& key, bool* out) const {
    if (!Has(key)) return Status::Ok();
    const YAML::Node n = node_[key];
    if (!n.IsScalar() || !YAML::convert<bool>::decode(n, *out)) {
      return Error(n, Path(key), "expected true or false, found " + Show(n));
    }
    return Status::Ok();
  }

  // A string restricted to names that `parse` accepts.
  template <typename E>
  Status GetEnum(const std::string& key, E* out, const std::function<std::optional<E>(const std::string&)>& parse,
                 const char* choices) const {
    std::string s;
    if (!Has(key)) return Status::Ok();
    CHORUS_RETURN_IF_ERROR(GetString(key, &s));
    const std::optional<E> v = parse(s);
    if (!v) return Error(node_[key], Path(key), std::string("expected one of ") + choices + ", found \"" + s + "\"");
    *out = *v;
    return Status::Ok();
  }

  Status Error(const YAML::Node& at, const std::string& key, const std::string& what) const {
    // A missing key has no position of its own: point at the section that should hold it.
    const YAML::Mark m = at.IsDefined() ? at.Mark() : node_.IsDefined() ? node_.Mark() : YAML::Mark::null_mark();
    const std::string where = m.is_null() ? file_ : file_ + ":" + std::to_string(m.line + 1) + ":" +
                                                        std::to_string(m.column + 1);
    return Status::InvalidInput(where + ": " + key + ": " + what);
  }

 private:
  static std::string Show(const YAML::Node& n) {
    if (n.IsScalar()) return "\"" + n.Scalar() + "\"";
    return n.IsSequence() ? "a list" : "a mapping";
  }
  template <typename T>
  static std::string Num(T v) {
    std::ostringstream s;
    s << v;
    return s.str();
  }

  YAML::Node node_;
  std::string name_;
  const std::string& file_;
};

constexpr int kMaxInt = std::numeric_limits<int>::max();

std::string Resolve(const std::string& base_dir, const std::string& p) {
  if (p.empty() || std::filesystem::path(p).is_absolute()) return p;
  return (std::filesystem::path(base_dir) / p).lexically_normal().string();
}

Status LoadRun(const Section& s, RunConfig* run) {
  CHORUS_RETURN_IF_ERROR(s.Check({"name", "seed", "out_dir"}));
  CHORUS_RETURN_IF_ERROR(s.GetString("name", &run->name));
  const bool name_ok = !run->name.empty() && run->name.find_first_not_of(
      "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-") == std::string::npos;
  if (!name_ok || run->name[0] == '.') {
    return s.Error(s.Node("name"), s.Path("name"), "expected letters, digits, '.', '_' or '-' (not starting with '.')");
  }
  CHORUS_RETURN_IF_ERROR(s.Get<uint64_t>("seed", &run->seed, "a non-negative integer", 0, UINT64_MAX));
  return s.GetString("out_dir", &run->out_dir);
}

// train / test: a path (csv) or {images, labels} (idx).
Status LoadSource(const Section& data, const std::string& key, bool idx, std::string* csv, IdxFiles* files) {
  if (!data.Has(key)) return data.Error(data.Node(key), data.Path(key), "required");
  if (idx) {
    Section f = data.Child(key);
    CHORUS_RETURN_IF_ERROR(f.Check({"images", "labels"}));
    CHORUS_RETURN_IF_ERROR(f.GetString("images", &files->images));
    CHORUS_RETURN_IF_ERROR(f.GetString("labels", &files->labels));
    if (files->images.empty() || files->labels.empty()) {
      return data.Error(data.Node(key), data.Path(key), "expected {images: FILE, labels: FILE}");
    }
    return Status::Ok();
  }
  return data.GetString(key, csv);
}

// validation: {fraction | file | images+labels, folds}. Naming a fraction or a file asks for that
// holdout, so `folds` then defaults to 0 instead of auto.
Status LoadValidation(const Section& data, DataConfig* d) {
  if (!data.Has("validation")) return Status::Ok();
  Section v = data.Child("validation");
  CHORUS_RETURN_IF_ERROR(v.Check({"fraction", "file", "images", "labels", "folds"}));
  CHORUS_RETURN_IF_ERROR(v.Get<double>("fraction", &d->validation_fraction, "a fraction", 1e-9, 0.5));
  if (d->format == "idx") {
    CHORUS_RETURN_IF_ERROR(v.GetString("images", &d->validation_idx.images));
    CHORUS_RETURN_IF_ERROR(v.GetString("labels", &d->validation_idx.labels));
    if (d->validation_idx.images.empty() != d->validation_idx.labels.empty()) {
      return v.Error(data.Node("validation"), v.Path("images"), "give both images and labels");
    }
  } else {
    CHORUS_RETURN_IF_ERROR(v.GetString("file", &d->validation_file));
  }
  const bool holdout_named = v.Has("fraction") || v.Has("file") || v.Has("images");
  if (!v.Has("folds")) {
    if (holdout_named) d->folds = 0;
    return Status::Ok();
  }
  if (v.Node("folds").IsScalar() && v.Node("folds").Scalar() == "auto") {
    d->folds = -1;
  } else {
    CHORUS_RETURN_IF_ERROR(v.Get<int>("folds", &d->folds, "auto, 0 (holdout) or a fold count", 0, 50));
    if (d->folds == 1) return v.Error(v.Node("folds"), v.Path("folds"), "expected auto, 0 (holdout) or 2..50, found 1");
  }
  if (d->folds != 0 && (v.Has("file") || v.Has("images"))) {
    return v.Error(v.Node("folds"), v.Path("folds"), "cross-fitting needs no validation file: remove one of them");
  }
  return Status::Ok();
}

Status LoadData(const Section& s, const std::string& base, DataConfig* d) {
  CHORUS_RETURN_IF_ERROR(s.Check({"format", "train", "test", "validation", "target", "task",
                                  "categorical", "max_train_rows", "max_test_rows",
                                  "small_data_rows", "shift_test", "true_probabilities"}));
  CHORUS_RETURN_IF_ERROR(s.GetString("format", &d->format));
  if (d->format != "csv" && d->format != "idx") {
    return s.Error(s.Node("format"), s.Path("format"), "expected one of csv, idx, found \"" + d->format + "\"");
  }
  const bool idx = d->format == "idx";
  CHORUS_RETURN_IF_ERROR(LoadSource(s, "train", idx, &d->train, &d->train_idx));
  CHORUS_RETURN_IF_ERROR(LoadSource(s, "test", idx, &d->test, &d->test_idx));
  CHORUS_RETURN_IF_ERROR(LoadValidation(s, d));
  CHORUS_RETURN_IF_ERROR(s.GetString("target", &d->target));
  if (!idx && d->target.empty()) return s.Error(s.Node("target"), s.Path("target"), "required for csv data");
  CHORUS_RETURN_IF_ERROR(s.GetEnum<Task>("task", &d->task, ParseTask, "classification, regression"));
  if (s.Has("categorical")) {
    const YAML::Node c = s.Node("categorical");
    if (!c.IsSequence()) return s.Error(c, s.Path("categorical"), "expected a list of column names");
    d->categorical.clear();
    for (const auto& item : c) {
      if (!item.IsScalar()) return s.Error(item, s.Path("categorical"), "expected a column name");
      d->categorical.push_back(item.Scalar());
    }
  }
  CHORUS_RETURN_IF_ERROR(s.Get<int64_t>("max_train_rows", &d->max_train_rows, "a row count", 0, INT64_MAX));
  CHORUS_RETURN_IF_ERROR(s.Get<int64_t>("max_test_rows", &d->max_test_rows, "a row count", 0, INT64_MAX));
  CHORUS_RETURN_IF_ERROR(s.Get<int64_t>("small_data_rows", &d->small_data_rows, "a row count", 0, INT64_MAX));
  CHORUS_RETURN_IF_ERROR(s.GetString("shift_test", &d->shift_test));
  CHORUS_RETURN_IF_ERROR(s.GetString("true_probabilities", &d->true_probabilities));
  for (std::string* p : {&d->train, &d->test, &d->validation_file, &d->shift_test, &d->true_probabilities,
                         &d->train_idx.images, &d->train_idx.labels, &d->test_idx.images,
                         &d->test_idx.labels, &d->validation_idx.images, &d->validation_idx.labels}) {
    *p = Resolve(base, *p);
  }
  return Status::Ok();
}

// A list of hidden-layer widths, each in [1, 65536] (may be empty), at s's key `key`.
Status LayerWidths(const Section& s, const YAML::Node& list, const std::string& key, std::vector<int>* out) {
  if (!list.IsSequence()) return s.Error(list, s.Path(key), "expected a list of layer widths, e.g. [64, 64]");
  out->clear();
  for (const auto& item : list) {
    int w = 0;
    if (!item.IsScalar() || !YAML::convert<int>::decode(item, w) || w < 1 || w > 65536) {
      return s.Error(item, s.Path(key), "expected a width in [1, 65536]");
    }
    out->push_back(w);
  }
  return Status::Ok();
}

// model.image: [channels, height, width], each in [1, 65536].
Status LoadImage(const Section& s, ImageShape* image) {
  const YAML::Node list = s.Node("image");
  int v[3] = {0, 0, 0};
  bool ok = list.IsSequence() && list.size() == 3;
  for (size_t i = 0; ok && i < 3; ++i) {
    ok = list[i].IsScalar() && YAML::convert<int>::decode(list[i], v[i]) && v[i] >= 1 && v[i] <= 65536;
  }
  if (!ok) {
    return s.Error(list, s.Path("image"),
                   "expected [channels, height, width], each in [1, 65536], e.g. [1, 28, 28]");
  }
  *image = {v[0], v[1], v[2]};
  return Status::Ok();
}

// model.conv: a list of stages, each {channels, kernel, pool}.
Status LoadConvStages(const Section& s, std::vector<ConvStage>* stages) {
  const YAML::Node list = s.Node("conv");
  if (!list.IsSequence() || list.size() < 1 || list.size() > static_cast<size_t>(kMaxConvStages)) {
    return s.Error(list, s.Path("conv"),
                   "expected a list of 1 to " + std::to_string(kMaxConvStages) +
                       " stages, e.g. [{channels: 16, kernel: 3, pool: max}]");
  }
  stages->clear();
  for (size_t i = 0; i < list.size(); ++i) {
    const Section item = s.Item("conv", i);
    CHORUS_RETURN_IF_ERROR(item.Check({"channels", "kernel", "pool"}));
    ConvStage stage;
    CHORUS_RETURN_IF_ERROR(item.Get<int>("channels", &stage.channels, "a channel count", 1, 4096));
    CHORUS_RETURN_IF_ERROR(item.Get<int>("kernel", &stage.kernel, "an odd kernel size", 1, 15));
    if (stage.kernel % 2 == 0) {
      return item.Error(item.Node("kernel"), item.Path("kernel"),
                        "expected an odd kernel size (the padding keeps the image size), found " +
                            std::to_string(stage.kernel));
    }
    CHORUS_RETURN_IF_ERROR(item.GetEnum<Pooling>("pool", &stage.pool, ParsePooling, "none, max, average"));
    stages->push_back(stage);
  }
  return Status::Ok();
}

Status LoadModel(const Section& s, ModelConfig* m) {
  CHORUS_RETURN_IF_ERROR(s.Check({"image", "conv", "hidden", "activation"}));
  if (s.Has("image")) CHORUS_RETURN_IF_ERROR(LoadImage(s, &m->image));
  if (s.Has("conv")) {
    CHORUS_RETURN_IF_ERROR(LoadConvStages(s, &m->conv));
    if (!s.Has("image")) {
      return s.Error(s.Node("conv"), s.Path("image"),
                     "convolution stages need the input's shape, e.g. image: [1, 28, 28] (channels, height, width)");
    }
    const std::string problem = CheckConvStages(m->image, m->conv);
    if (!problem.empty()) return s.Error(s.Node("conv"), s.Path("conv"), problem);
  } else if (s.Has("image")) {
    return s.Error(s.Node("image"), s.Path("image"), "only used with conv stages; add model.conv or remove it");
  }
  if (s.Has("hidden")) CHORUS_RETURN_IF_ERROR(LayerWidths(s, s.Node("hidden"), "hidden", &m->hidden));
  return s.GetEnum<Activation>("activation", &m->activation, ParseActivation, "relu, tanh, gelu");
}

Status LoadSchedule(const Section& t, ScheduleConfig* sc) {
  if (!t.Has("schedule")) return Status::Ok();
  if (t.Node("schedule").IsScalar()) {
    return t.GetEnum<ScheduleKind>("schedule", &sc->kind, ParseSchedule, "constant, cosine, step");
  }
  Section s = t.Child("schedule");
  CHORUS_RETURN_IF_ERROR(s.Check({"kind", "every_epochs", "factor"}));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<ScheduleKind>("kind", &sc->kind, ParseSchedule, "constant, cosine, step"));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("every_epochs", &sc->step_every_epochs, "an epoch count", 1, kMaxInt));
  return s.Get<double>("factor", &sc->step_factor, "a factor", 1e-12, 1.0);
}

Status LoadEarlyStopping(const Section& t, EarlyStoppingConfig* e) {
  if (!t.Has("early_stopping")) return Status::Ok();
  Section s = t.Child("early_stopping");
  CHORUS_RETURN_IF_ERROR(s.Check({"mode", "patience"}));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<Switch>("mode", &e->mode, ParseSwitch, "auto, on, off"));
  return s.Get<int>("patience", &e->patience, "an epoch count", 1, 1000000);
}

Status LoadTrain(const Section& s, const std::string& base, TrainConfig* t) {
  CHORUS_RETURN_IF_ERROR(s.Check({"epochs", "batch_size", "parts", "products", "optimizer",
                                  "schedule", "early_stopping", "beta_nll", "warm_start",
                                  "warm_epochs"}));
  CHORUS_RETURN_IF_ERROR(s.GetString("warm_start", &t->warm_start));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("warm_epochs", &t->warm_epochs, "an epoch count (0: epochs)", 0, 1000000));
  t->warm_start = Resolve(base, t->warm_start);
  CHORUS_RETURN_IF_ERROR(s.Get<int>("epochs", &t->epochs, "an epoch count", 1, 1000000));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("batch_size", &t->batch_size, "a batch size", 1, 1 << 20));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("parts", &t->parts, "a part count (at most batch_size)", 1,
                                    t->batch_size));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<ProductPrecision>("products", &t->products,
                                                     ParseProductPrecision, "fp32, bf16"));
  CHORUS_RETURN_IF_ERROR(LoadSchedule(s, &t->schedule));
  CHORUS_RETURN_IF_ERROR(LoadEarlyStopping(s, &t->early_stopping));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("beta_nll", &t->beta_nll, "a beta", 0.0, 1.0));
  if (!s.Has("optimizer")) return Status::Ok();
  Section o = s.Child("optimizer");
  OptimizerConfig* op = &t->optimizer;
  CHORUS_RETURN_IF_ERROR(o.Check({"kind", "lr", "momentum", "nesterov", "weight_decay", "clip_norm"}));
  std::string kind = "sgd";
  CHORUS_RETURN_IF_ERROR(o.GetString("kind", &kind));
  if (kind != "sgd") return o.Error(o.Node("kind"), o.Path("kind"), "expected sgd, found \"" + kind + "\"");
  CHORUS_RETURN_IF_ERROR(o.Get<double>("lr", &op->lr, "a learning rate", 1e-12, 1e6));
  CHORUS_RETURN_IF_ERROR(o.Get<double>("momentum", &op->momentum, "a momentum", 0.0, 0.999999));
  CHORUS_RETURN_IF_ERROR(o.GetBool("nesterov", &op->nesterov));
  CHORUS_RETURN_IF_ERROR(o.Get<double>("weight_decay", &op->weight_decay, "a decay", 0.0, 1e6));
  return o.Get<double>("clip_norm", &op->clip_norm, "a gradient norm", 0.0, 1e12);
}

Status LoadBasin(const Section& s, BasinConfig* b) {
  CHORUS_RETURN_IF_ERROR(s.Check({"method", "epochs", "lr", "snapshots", "rank", "samples", "scale",
                                  "hessian", "prior_precision", "sampler", "cycles", "exploration",
                                  "samples_per_cycle", "posterior_temperature", "friction"}));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<BasinMethod>("method", &b->method, ParseBasinMethod,
                                                "none, gaussian_diag, gaussian_lowrank, laplace_last_layer, "
                                                "cyclical_sgmcmc"));
  SgmcmcConfig& m = b->sgmcmc;
  CHORUS_RETURN_IF_ERROR(s.GetEnum<SgmcmcSampler>("sampler", &m.sampler, ParseSgmcmcSampler, "sgld, sghmc"));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("cycles", &m.cycles, "a cycle count", 1, 100000));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("exploration", &m.exploration_fraction, "a fraction", 0.0, 0.999999));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("samples_per_cycle", &m.samples_per_cycle,
                                    "a sample count (at most 10000 over all cycles)", 1, 10000 / m.cycles));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("posterior_temperature", &m.temperature, "a temperature", 0.0, 1e6));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("friction", &m.friction, "a friction", 1e-6, 1.0));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<LaplaceHessian>("hessian", &b->hessian, ParseLaplaceHessian,
                                                   "auto, full, kronecker"));
  if (s.Has("prior_precision") && s.Node("prior_precision").IsScalar() &&
      s.Node("prior_precision").Scalar() == "tune") {
    b->prior_precision = 0;
  } else {
    CHORUS_RETURN_IF_ERROR(s.Get<double>("prior_precision", &b->prior_precision,
                                         "tune or a prior precision", 1e-12, 1e12));
  }
  CHORUS_RETURN_IF_ERROR(s.Get<int>("epochs", &b->epochs, "an epoch count", 1, 1000000));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("lr", &b->lr, "a learning rate", 1e-12, 1e6));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("snapshots", &b->snapshots, "a snapshot count", 2, 100000));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("rank", &b->rank, "a rank (at most snapshots)", 2, b->snapshots));
  // The default rank follows fewer snapshots down (it may not exceed them).
  if (!s.Has("rank")) b->rank = std::min(b->rank, b->snapshots);
  CHORUS_RETURN_IF_ERROR(s.Get<int>("samples", &b->samples, "a sample count", 1, 10000));
  if (s.Has("scale") && s.Node("scale").IsScalar() && s.Node("scale").Scalar() == "tune") {
    if (b->method == BasinMethod::kCyclicalSgmcmc) {
      return s.Error(s.Node("scale"), s.Path("scale"), "cyclical_sgmcmc samples are kept as drawn; remove scale: tune");
    }
    b->tune_scale = true;
    return Status::Ok();
  }
  return s.Get<double>("scale", &b->scale, "tune or a covariance scale", 1e-12, 1e6);
}

Status LoadEnsemble(const Section& s, EnsembleConfig* e) {
  CHORUS_RETURN_IF_ERROR(s.Check({"members", "min_members", "basin", "weighting", "greedy_rounds",
                                  "temperature"}));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("members", &e->members, "a member count", 1, 100000));
  e->min_members = e->members;
  CHORUS_RETURN_IF_ERROR(s.Get<int>("min_members", &e->min_members, "a member count", 1, e->members));
  if (s.Has("basin")) CHORUS_RETURN_IF_ERROR(LoadBasin(s.Child("basin"), &e->basin));
  CHORUS_RETURN_IF_ERROR(s.GetEnum<Weighting>("weighting", &e->weighting, ParseWeighting,
                                              "uniform, stacking, greedy"));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("greedy_rounds", &e->greedy_rounds, "a round count", 1, 100000));
  if (!s.Has("temperature")) return Status::Ok();
  if (s.Node("temperature").IsScalar() && s.Node("temperature").Scalar() == "tune") {
    e->tune_temperature = true;
    return Status::Ok();
  }
  e->tune_temperature = false;
  return s.Get<double>("temperature", &e->temperature, "tune or a temperature", 1e-6, 1e6);
}

Status LoadReport(const Section& s, ReportConfig* r) {
  CHORUS_RETURN_IF_ERROR(s.Check({"ece_bins", "size_curve_subsets", "nll_tolerance"}));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("ece_bins", &r->ece_bins, "a bin count", 1, 1000));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("nll_tolerance", &r->nll_tolerance, "a tolerance in nats", 0.0, 100.0));
  return s.Get<int>("size_curve_subsets", &r->size_curve_subsets, "a subset count", 1, 10000);
}

// A list of numbers in [lo, hi], at most kMaxGridValues of them.
constexpr size_t kMaxGridValues = 20;
Status GetNumberList(const Section& s, const std::string& key, double lo, double hi,
                     std::vector<double>* out) {
  if (!s.Has(key)) return Status::Ok();
  const YAML::Node list = s.Node(key);
  if (!list.IsSequence() || list.size() == 0 || list.size() > kMaxGridValues) {
    return s.Error(list, s.Path(key), "expected a list of 1 to 20 values");
  }
  for (const auto& item : list) {
    double v = 0;
    if (!item.IsScalar() || !YAML::convert<double>::decode(item, v) || !(v >= lo && v <= hi)) {
      std::ostringstream range;
      range << "expected a number in [" << lo << ", " << hi << "]";
      return s.Error(item, s.Path(key), range.str());
    }
    out->push_back(v);
  }
  return Status::Ok();
}

Status LoadSearch(const Section& s, SearchConfig* g) {
  CHORUS_RETURN_IF_ERROR(s.Check({"weight_decay", "lr", "hidden", "beta_nll"}));
  CHORUS_RETURN_IF_ERROR(GetNumberList(s, "weight_decay", 0.0, 1e6, &g->weight_decay));
  CHORUS_RETURN_IF_ERROR(GetNumberList(s, "lr", 1e-12, 1e6, &g->lr));
  CHORUS_RETURN_IF_ERROR(GetNumberList(s, "beta_nll", 0.0, 1.0, &g->beta_nll));
  if (s.Has("hidden")) {
    const YAML::Node list = s.Node("hidden");
    if (!list.IsSequence() || list.size() == 0 || list.size() > kMaxGridValues) {
      return s.Error(list, s.Path("hidden"), "expected a list of 1 to 20 layer-width lists, e.g. [[32], [64, 64]]");
    }
    for (const auto& widths : list) {
      std::vector<int> hidden;
      CHORUS_RETURN_IF_ERROR(LayerWidths(s, widths, "hidden", &hidden));
      g->hidden.push_back(hidden);
    }
  }
  return Status::Ok();
}

Status LoadCompute(const Section& s, ComputeConfig* c) {
  CHORUS_RETURN_IF_ERROR(s.Check({"threads"}));
  return s.Get<int>("threads", &c->threads, "a thread count (0 = all cores)", 0, 4096);
}

Status LoadCluster(const Section& s, const std::string& base, ClusterConfig* c) {
  CHORUS_RETURN_IF_ERROR(s.Check({"local_workers", "listen", "token_file", "tls", "lease_seconds",
                                  "max_attempts", "metrics_listen"}));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("local_workers", &c->local_workers,
                                    "a worker count (-1 = one per core)", -1, 4096));
  CHORUS_RETURN_IF_ERROR(s.GetString("listen", &c->listen));
  CHORUS_RETURN_IF_ERROR(s.GetString("token_file", &c->token_file));
  CHORUS_RETURN_IF_ERROR(s.Get<double>("lease_seconds", &c->lease_seconds, "seconds", 0.1, 86400.0));
  CHORUS_RETURN_IF_ERROR(s.Get<int>("max_attempts", &c->max_attempts, "an attempt count", 1, 1000));
  CHORUS_RETURN_IF_ERROR(s.GetString("metrics_listen", &c->metrics_listen));
  if (!c->metrics_listen.empty()) {
    const size_t colon = c->metrics_listen.rfind(':');
    const std::string port = colon == std::string::npos ? "" : c->metrics_listen.substr(colon + 1);
    if (colon == 0 || port.empty() || port.size() > 5 || port.find_first_not_of("0123456789") != std::string::npos ||
        std::stoi(port) > 65535) {
      return s.Error(s.Node("metrics_listen"), s.Path("metrics_listen"),
                     "expected HOST:PORT (PORT 0 picks a free one), for example \"127.0.0.1:9464\"");
    }
    if (c->local_workers == 0 && c->listen.empty()) {
      return s.Error(s.Node("metrics_listen"), s.Path("metrics_listen"),
                     "the in-process route (local_workers: 0, no listen) has no coordinator to report on; "
                     "start local workers or listen for remote ones");
    }
  }
  if (s.Has("tls")) {
    Section t = s.Child("tls");
    CHORUS_RETURN_IF_ERROR(t.Check({"cert", "key", "client_ca"}));
    CHORUS_RETURN_IF_ERROR(t.GetString("cert", &c->tls_cert));
    CHORUS_RETURN_IF_ERROR(t.GetString("key", &c->tls_key));
    CHORUS_RETURN_IF_ERROR(t.GetString("client_ca", &c->tls_client_ca));
    if (c->tls_cert.empty() || c->tls_key.empty()) {
      return t.Error(s.Node("tls"), s.Path("tls"), "expected {cert: FILE, key: FILE, client_ca?: FILE}");
    }
  }
  const std::string host = c->listen.substr(0, c->listen.rfind(':'));
  const bool loopback = c->listen.empty() || host == "127.0.0.1" || host == "localhost" || host == "[::1]";
  if (!loopback && c->token_file.empty()) {
    return s.Error(s.Node("listen"), s.Path("listen"),
                   "listening beyond loopback needs cluster.token_file (refusing to run without a token)");
  }
  for (std::string* p : {&c->token_file, &c->tls_cert, &c->tls_key, &c->tls_client_ca}) *p = Resolve(base, *p);
  return Status::Ok();
}

Status LoadAll(const YAML::Node& root, const std::string& path, Config* c) {
  // Absolute, so the resolved config written into a run directory loads from anywhere.
  const std::string base = std::filesystem::absolute(path).parent_path().string();
  Section top(root, "", path);
  CHORUS_RETURN_IF_ERROR(top.Check({"run", "data", "model", "train", "ensemble", "report", "search",
                                    "compute", "cluster"}));
  if (!top.Has("data")) return Status::InvalidInput(path + ": data: required section is missing");
  if (top.Has("run")) CHORUS_RETURN_IF_ERROR(LoadRun(top.Child("run"), &c->run));
  CHORUS_RETURN_IF_ERROR(LoadData(top.Child("data"), base.empty() ? "." : base, &c->data));
  if (top.Has("model")) CHORUS_RETURN_IF_ERROR(LoadModel(top.Child("model"), &c->model));
  if (top.Has("train")) {
    CHORUS_RETURN_IF_ERROR(LoadTrain(top.Child("train"), base.empty() ? "." : base, &c->train));
  }
  if (top.Has("ensemble")) CHORUS_RETURN_IF_ERROR(LoadEnsemble(top.Child("ensemble"), &c->ensemble));
  else c->ensemble.min_members = c->ensemble.members;
  if (top.Has("report")) CHORUS_RETURN_IF_ERROR(LoadReport(top.Child("report"), &c->report));
  if (top.Has("search")) CHORUS_RETURN_IF_ERROR(LoadSearch(top.Child("search"), &c->search));
  if (!c->train.warm_start.empty() && !c->search.empty()) {
    const Section t = top.Child("train");
    return t.Error(t.Node("warm_start"), t.Path("warm_start"),
                   "a warm start fine-tunes the warm-start bundle's network, which a search grid "
                   "would change: remove the search section or the warm start");
  }
  if (top.Has("compute")) CHORUS_RETURN_IF_ERROR(LoadCompute(top.Child("compute"), &c->compute));
  if (top.Has("cluster")) {
    CHORUS_RETURN_IF_ERROR(LoadCluster(top.Child("cluster"), base.empty() ? "." : base, &c->cluster));
  }
  return Status::Ok();
}

void EmitIdx(YAML::Emitter& out, const char* key, const IdxFiles& f) {
  out << YAML::Key << key << YAML::Value << YAML::Flow << YAML::BeginMap << YAML::Key << "images"
      << YAML::Value << f.images << YAML::Key << "labels" << YAML::Value << f.labels << YAML::EndMap;
}

void EmitData(YAML::Emitter& out, const DataConfig& d) {
  out << YAML::Key << "data" << YAML::Value << YAML::BeginMap;
  out << YAML::Key << "format" << YAML::Value << d.format;
  const bool idx = d.format == "idx";
  if (idx) {
    EmitIdx(out, "train", d.train_idx);
    EmitIdx(out, "test", d.test_idx);
  } else {
    out << YAML::Key << "train" << YAML::Value << d.train << YAML::Key << "test" << YAML::Value << d.test;
  }
  out << YAML::Key << "validation" << YAML::Value << YAML::Flow << YAML::BeginMap;
  if (!d.validation_file.empty()) out << YAML::Key << "file" << YAML::Value << d.validation_file;
  else if (!d.validation_idx.images.empty()) {
    out << YAML::Key << "images" << YAML::Value << d.validation_idx.images << YAML::Key << "labels"
        << YAML::Value << d.validation_idx.labels;
  } else out << YAML::Key << "fraction" << YAML::Value << d.validation_fraction;
  out << YAML::Key << "folds" << YAML::Value;
  if (d.folds < 0) out << "auto";
  else out << d.folds;
  out << YAML::EndMap;
  if (!idx) out << YAML::Key << "target" << YAML::Value << d.target;
  out << YAML::Key << "task" << YAML::Value << TaskName(d.task);
  if (!idx) out << YAML::Key << "categorical" << YAML::Value << YAML::Flow << d.categorical;
  out << YAML::Key << "max_train_rows" << YAML::Value << d.max_train_rows;
  out << YAML::Key << "max_test_rows" << YAML::Value << d.max_test_rows;
  out << YAML::Key << "small_data_rows" << YAML::Value << d.small_data_rows;
  if (!d.shift_test.empty()) out << YAML::Key << "shift_test" << YAML::Value << d.shift_test;
  if (!d.true_probabilities.empty()) {
    out << YAML::Key << "true_probabilities" << YAML::Value << d.true_probabilities;
  }
  out << YAML::EndMap;
}

void EmitTrain(YAML::Emitter& out, const TrainConfig& t) {
  const OptimizerConfig& o = t.optimizer;
  out << YAML::Key << "train" << YAML::Value << YAML::BeginMap;
  out << YAML::Key << "epochs" << YAML::Value << t.epochs;
  out << YAML::Key << "batch_size" << YAML::Value << t.batch_size;
  out << YAML::Key << "parts" << YAML::Value << t.parts;
  out << YAML::Key << "products" << YAML::Value << ProductPrecisionName(t.products);
  out << YAML::Key << "optimizer" << YAML::Value << YAML::Flow << YAML::BeginMap
      << YAML::Key << "kind" << YAML::Value << "sgd" << YAML::Key << "lr" << YAML::Value << o.lr
      << YAML::Key << "momentum" << YAML::Value << o.momentum << YAML::Key << "nesterov"
      << YAML::Value << o.nesterov << YAML::Key << "weight_decay" << YAML::Value << o.weight_decay
      << YAML::Key << "clip_norm" << YAML::Value << o.clip_norm << YAML::EndMap;
  out << YAML::Key << "schedule" << YAML::Value << YAML::Flow << YAML::BeginMap << YAML::Key
      << "kind" << YAML::Value << ScheduleName(t.schedule.kind);
  if (t.schedule.kind == ScheduleKind::kStep) {
    out << YAML::Key << "every_epochs" << YAML::Value << t.schedule.step_every_epochs << YAML::Key
        << "factor" << YAML::Value << t.schedule.step_factor;
  }
  out << YAML::EndMap;
  out << YAML::Key << "early_stopping" << YAML::Value << YAML::Flow << YAML::BeginMap << YAML::Key
      << "mode" << YAML::Value << SwitchName(t.early_stopping.mode) << YAML::Key << "patience"
      << YAML::Value << t.early_stopping.patience << YAML::EndMap;
  out << YAML::Key << "beta_nll" << YAML::Value << t.beta_nll;
  if (!t.warm_start.empty()) {
    out << YAML::Key << "warm_start" << YAML::Value << t.warm_start << YAML::Key << "warm_epochs"
        << YAML::Value << t.warm_epochs;
  }
  out << YAML::EndMap;
}

void EmitSearch(YAML::Emitter& out, const SearchConfig& g) {
  if (g.empty()) return;
  out << YAML::Key << "search" << YAML::Value << YAML::BeginMap;
  if (!g.weight_decay.empty()) out << YAML::Key << "weight_decay" << YAML::Value << YAML::Flow << g.weight_decay;
  if (!g.lr.empty()) out << YAML::Key << "lr" << YAML::Value << YAML::Flow << g.lr;
  if (!g.hidden.empty()) out << YAML::Key << "hidden" << YAML::Value << YAML::Flow << g.hidden;
  if (!g.beta_nll.empty()) out << YAML::Key << "beta_nll" << YAML::Value << YAML::Flow << g.beta_nll;
  out << YAML::EndMap;
}

void EmitBasin(YAML::Emitter& out, const BasinConfig& b) {
  out << YAML::Key << "basin" << YAML::Value << YAML::Flow << YAML::BeginMap
      << YAML::Key << "method" << YAML::Value << BasinMethodName(b.method)
      << YAML::Key << "epochs" << YAML::Value << b.epochs << YAML::Key << "lr" << YAML::Value << b.lr
      << YAML::Key << "snapshots" << YAML::Value << b.snapshots << YAML::Key << "rank"
      << YAML::Value << b.rank << YAML::Key << "samples" << YAML::Value << b.samples
      << YAML::Key << "scale" << YAML::Value;
  if (b.tune_scale) out << "tune";
  else out << b.scale;
  if (b.method == BasinMethod::kLaplaceLastLayer) {
    out << YAML::Key << "hessian" << YAML::Value << LaplaceHessianName(b.hessian)
        << YAML::Key << "prior_precision" << YAML::Value;
    if (b.prior_precision == 0) out << "tune";
    else out << b.prior_precision;
  }
  if (b.method == BasinMethod::kCyclicalSgmcmc) {
    const SgmcmcConfig& m = b.sgmcmc;
    out << YAML::Key << "sampler" << YAML::Value << SgmcmcSamplerName(m.sampler)
        << YAML::Key << "cycles" << YAML::Value << m.cycles << YAML::Key << "exploration"
        << YAML::Value << m.exploration_fraction << YAML::Key << "samples_per_cycle" << YAML::Value
        << m.samples_per_cycle << YAML::Key << "posterior_temperature" << YAML::Value << m.temperature
        << YAML::Key << "friction" << YAML::Value << m.friction;
  }
  out << YAML::EndMap;
}

void EmitCluster(YAML::Emitter& out, const ClusterConfig& c) {
  out << YAML::Key << "cluster" << YAML::Value << YAML::BeginMap
      << YAML::Key << "local_workers" << YAML::Value << c.local_workers
      << YAML::Key << "listen" << YAML::Value;
  if (c.listen.empty()) out << YAML::Null;
  else out << c.listen;
  out << YAML::Key << "token_file" << YAML::Value;
  if (c.token_file.empty()) out << YAML::Null;
  else out << c.token_file;
  if (!c.tls_cert.empty()) {
    out << YAML::Key << "tls" << YAML::Value << YAML::Flow << YAML::BeginMap << YAML::Key << "cert"
        << YAML::Value << c.tls_cert << YAML::Key << "key" << YAML::Value << c.tls_key;
    if (!c.tls_client_ca.empty()) out << YAML::Key << "client_ca" << YAML::Value << c.tls_client_ca;
    out << YAML::EndMap;
  }
  out << YAML::Key << "lease_seconds" << YAML::Value << c.lease_seconds
      << YAML::Key << "max_attempts" << YAML::Value << c.max_attempts;
  if (!c.metrics_listen.empty()) out << YAML::Key << "metrics_listen" << YAML::Value << c.metrics_listen;
  out << YAML::EndMap;
}

// model.image and model.conv, only when there are stages (so that the resolved config, and its
// hash, of a network without them is what it was before stages existed).
void EmitConv(YAML::Emitter& out, const ModelConfig& m) {
  if (m.conv.empty()) return;
  out << YAML::Key << "image" << YAML::Value << YAML::Flow
      << std::vector<int>{m.image.channels, m.image.height, m.image.width};
  out << YAML::Key << "conv" << YAML::Value << YAML::BeginSeq;
  for (const ConvStage& st : m.conv) {
    out << YAML::Flow << YAML::BeginMap << YAML::Key << "channels" << YAML::Value << st.channels
        << YAML::Key << "kernel" << YAML::Value << st.kernel << YAML::Key << "pool" << YAML::Value
        << PoolingName(st.pool) << YAML::EndMap;
  }
  out << YAML::EndSeq;
}

// The model-relevant sections; with `everything`, also names, paths and speed-only settings.
std::string Emit(const Config& c, bool everything) {
  YAML::Emitter out;
  out.SetDoublePrecision(17);
  out << YAML::BeginMap;
  out << YAML::Key << "run" << YAML::Value << YAML::BeginMap;
  if (everything) out << YAML::Key << "name" << YAML::Value << c.run.name;
  out << YAML::Key << "seed" << YAML::Value << c.run.seed;
  if (everything) out << YAML::Key << "out_dir" << YAML::Value << c.run.out_dir;
  out << YAML::EndMap;
  EmitData(out, c.data);
  out << YAML::Key << "model" << YAML::Value << YAML::BeginMap;
  EmitConv(out, c.model);
  out << YAML::Key << "hidden" << YAML::Value << YAML::Flow << c.model.hidden << YAML::Key
      << "activation" << YAML::Value << ActivationName(c.model.activation) << YAML::EndMap;
  EmitTrain(out, c.train);
  out << YAML::Key << "ensemble" << YAML::Value << YAML::BeginMap
      << YAML::Key << "members" << YAML::Value << c.ensemble.members
      << YAML::Key << "min_members" << YAML::Value << c.ensemble.min_members;
  EmitBasin(out, c.ensemble.basin);
  out << YAML::Key << "weighting" << YAML::Value << WeightingName(c.ensemble.weighting)
      << YAML::Key << "greedy_rounds" << YAML::Value << c.ensemble.greedy_rounds
      << YAML::Key << "temperature" << YAML::Value;
  if (c.ensemble.tune_temperature) out << "tune";
  else out << c.ensemble.temperature;
  out << YAML::EndMap;
  out << YAML::Key << "report" << YAML::Value << YAML::BeginMap << YAML::Key << "ece_bins"
      << YAML::Value << c.report.ece_bins << YAML::Key << "size_curve_subsets" << YAML::Value
      << c.report.size_curve_subsets << YAML::Key << "nll_tolerance" << YAML::Value
      << c.report.nll_tolerance << YAML::EndMap;
  EmitSearch(out, c.search);
  if (everything) {
    out << YAML::Key << "compute" << YAML::Value << YAML::BeginMap << YAML::Key << "threads"
        << YAML::Value << c.compute.threads << YAML::EndMap;
    EmitCluster(out, c.cluster);
  }
  out << YAML::EndMap;
  return std::string(out.c_str()) + "\n";
}

}  // namespace

std::string ConfigToYaml(const Config& config) { return Emit(config, true); }

std::string ConfigHash(const Config& config) {
  const std::string text = Emit(config, false);
  return Sha256Hex(text.data(), text.size());
}

StatusOr<Config> ParseConfig(const std::string& yaml_text, const std::string& path) {
  Config config;
  try {
    const YAML::Node root = YAML::Load(yaml_text);
    if (!root.IsMap()) return Status::InvalidInput(path + ": expected a YAML mapping at the top level");
    CHORUS_RETURN_IF_ERROR(LoadAll(root, path, &config));
  } catch (const YAML::Exception& e) {
    return Status::InvalidInput(path + ":" + std::to_string(e.mark.line + 1) + ":" +
                                std::to_string(e.mark.column + 1) + ": " + e.msg);
  }
  return config;
}

StatusOr<Config> LoadConfigFile(const std::string& path) {
  CHORUS_ASSIGN_OR_RETURN(std::string text, ReadFileToString(path, 1 << 20));
  return ParseConfig(text, path);
}

}  // namespace chorus

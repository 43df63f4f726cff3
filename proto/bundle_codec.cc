#include "proto/bundle_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <sys/stat.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <exception>
#include <memory>
#include <optional>

#include "bundle.pb.h"
#include "common/file_util.h"
#include "common/sha256.h"

namespace chorus {
namespace {

namespace wire = ::chorus::bundle;

constexpr char kMagic[8] = {'\x89', 'C', 'H', 'O', 'R', 'U', 'S', '\n'};

// ---- common/ types to messages ----

void ToWire(const BasinFit& fit, wire::BasinFit* out) {
  out->set_method(BasinMethodName(fit.method));
  out->mutable_mean()->Add(fit.mean.begin(), fit.mean.end());
  out->mutable_variance()->Add(fit.variance.begin(), fit.variance.end());
  out->mutable_deviations()->set_rows(fit.deviations.rows());
  out->mutable_deviations()->set_cols(fit.deviations.cols());
  out->mutable_deviations()->mutable_values()->Add(fit.deviations.data(),
                                                   fit.deviations.data() + fit.deviations.size());
  if (fit.method == BasinMethod::kCyclicalSgmcmc) {
    out->mutable_samples()->set_rows(fit.samples.rows());
    out->mutable_samples()->set_cols(fit.samples.cols());
    out->mutable_samples()->mutable_values()->Add(fit.samples.data(), fit.samples.data() + fit.samples.size());
  }
  if (fit.method != BasinMethod::kLaplaceLastLayer) return;
  const LaplaceFactors& f = fit.laplace;
  wire::LaplaceFactors* l = out->mutable_laplace();
  l->set_form(LaplaceFormName(f.form));
  l->set_outputs(f.outputs);
  l->set_prior_precision(f.prior_precision);
  for (const auto& [m, w] : {std::pair{&f.eigenvectors, l->mutable_eigenvectors()},
                             std::pair{&f.output_eigenvectors, l->mutable_output_eigenvectors()}}) {
    w->set_rows(m->rows());
    w->set_cols(m->cols());
    w->mutable_values()->Add(m->data(), m->data() + m->size());
  }
  l->mutable_eigenvalues()->Add(f.eigenvalues.begin(), f.eigenvalues.end());
  l->mutable_output_eigenvalues()->Add(f.output_eigenvalues.begin(), f.output_eigenvalues.end());
}

void ToWire(const BundleMember& m, wire::Member* out) {
  out->set_index(m.index);
  out->set_seed(m.seed);
  out->set_weight(m.weight);
  out->mutable_parameters()->Add(m.parameters.begin(), m.parameters.end());
  if (m.basin.method != BasinMethod::kNone) ToWire(m.basin, out->mutable_basin());
  out->mutable_sample_seeds()->Add(m.sample_seeds.begin(), m.sample_seeds.end());
}

void ToWire(const Preprocessing& p, wire::Preprocessing* out) {
  out->set_format(p.format);
  out->set_target(p.target);
  for (const FeaturePlan::Column& c : p.plan.columns) {
    wire::InputColumn* column = out->add_columns();
    column->set_name(c.name);
    column->set_categorical(c.categorical);
    if (!c.categorical) continue;
    const std::vector<std::string>& vocabulary = p.plan.categorical[c.index].vocabulary;
    column->mutable_vocabulary()->Add(vocabulary.begin(), vocabulary.end());
  }
  out->mutable_feature_mean()->Add(p.standardizer.mean.begin(), p.standardizer.mean.end());
  out->mutable_feature_scale()->Add(p.standardizer.scale.begin(), p.standardizer.scale.end());
  out->set_target_mean(p.target_mean);
  out->set_target_scale(p.target_scale);
}

void ToWire(const DistributionSketch& s, wire::DistributionSketch* out) {
  out->mutable_values()->Add(s.values.begin(), s.values.end());
  out->mutable_below()->Add(s.below.begin(), s.below.end());
  out->mutable_upto()->Add(s.upto.begin(), s.upto.end());
}

void ToWire(const TrainingSummary& s, wire::TrainingSummary* out) {
  out->set_rows(s.rows);
  for (const ColumnSummary& c : s.columns) {
    wire::ColumnSummary* column = out->add_columns();
    column->set_name(c.name);
    column->set_categorical(c.categorical);
    if (!c.categorical) ToWire(c.numeric, column->mutable_numeric());
    column->mutable_category_shares()->Add(c.category_shares.begin(), c.category_shares.end());
  }
  out->mutable_class_shares()->Add(s.class_shares.begin(), s.class_shares.end());
  if (!s.target.empty()) ToWire(s.target, out->mutable_target());
}

void ToWire(const Bundle& b, wire::Bundle* out) {
  out->set_task(TaskName(b.task));
  out->mutable_class_names()->Add(b.class_names.begin(), b.class_names.end());
  ToWire(b.preprocessing, out->mutable_preprocessing());
  out->mutable_widths()->Add(b.widths.begin(), b.widths.end());
  out->set_activation(ActivationName(b.activation));
  if (!b.conv.empty()) {
    for (int v : {b.image.channels, b.image.height, b.image.width}) out->add_image(v);
    for (const ConvStage& st : b.conv) {
      wire::ConvStage* c = out->add_conv();
      c->set_channels(st.channels);
      c->set_kernel(st.kernel);
      c->set_pool(PoolingName(st.pool));
    }
  }
  for (const BundleMember& m : b.members) ToWire(m, out->add_members());
  out->set_basin_scale(b.basin_scale);
  out->set_temperature(b.temperature);
  out->set_run_name(b.run_name);
  out->set_chorus_version(b.chorus_version);
  out->set_data_hash(b.data_hash);
  out->set_config_hash(b.config_hash);
  for (const auto& [name, value] : b.test_metrics) {
    wire::Metric* metric = out->add_test_metrics();
    metric->set_name(name);
    metric->set_value(value);
  }
  if (!b.training_summary.empty()) ToWire(b.training_summary, out->mutable_training_summary());
}

// ---- messages to common/ types ----

template <typename T>
StatusOr<T> Parsed(const std::optional<T>& value, const std::string& text, const char* field,
                   const std::string& source) {
  if (value) return *value;
  return Status::InvalidInput(source + ": " + field + ": unknown value \"" + text + "\"");
}

// A FloatMatrix whose rows x cols equals its value count, checked without overflow before
// anything is allocated.
StatusOr<Matrix> FromWire(const wire::FloatMatrix& w, const std::string& where) {
  const int64_t rows = w.rows(), cols = w.cols(), values = w.values_size();
  const bool consistent = rows >= 0 && cols >= 0 &&
                          (cols == 0 ? values == 0 : values % cols == 0 && values / cols == rows);
  if (!consistent) {
    return Status::InvalidInput(where + ": a " + std::to_string(rows) + " x " + std::to_string(cols) +
                                " matrix holding " + std::to_string(values) + " values");
  }
  Matrix m(rows, cols);
  std::copy(w.values().begin(), w.values().end(), m.data());
  return m;
}

StatusOr<LaplaceFactors> FromWire(const wire::LaplaceFactors& w, const std::string& where) {
  LaplaceFactors f;
  CHORUS_ASSIGN_OR_RETURN(f.form, Parsed(ParseLaplaceForm(w.form()), w.form(), "laplace.form", where));
  f.outputs = w.outputs();
  f.prior_precision = w.prior_precision();
  CHORUS_ASSIGN_OR_RETURN(f.eigenvectors, FromWire(w.eigenvectors(), where + ": laplace.eigenvectors"));
  f.eigenvalues.assign(w.eigenvalues().begin(), w.eigenvalues().end());
  CHORUS_ASSIGN_OR_RETURN(f.output_eigenvectors,
                          FromWire(w.output_eigenvectors(), where + ": laplace.output_eigenvectors"));
  f.output_eigenvalues.assign(w.output_eigenvalues().begin(), w.output_eigenvalues().end());
  return f;
}

StatusOr<BasinFit> FromWire(const wire::BasinFit& w, const std::string& where) {
  BasinFit fit;
  CHORUS_ASSIGN_OR_RETURN(fit.method,
                          Parsed(ParseBasinMethod(w.method()), w.method(), "basin.method", where));
  const int64_t rows = w.deviations().rows(), cols = w.deviations().cols();
  const int64_t values = w.deviations().values_size();
  // rows * cols == values, checked without overflow before anything is allocated.
  const bool consistent = rows >= 0 && cols >= 0 &&
                          (cols == 0 ? values == 0 : values % cols == 0 && values / cols == rows);
  if (fit.method == BasinMethod::kNone || !consistent) {
    return Status::InvalidInput(where + ": basin fit: method \"" + w.method() + "\" with " +
                                std::to_string(rows) + " x " + std::to_string(cols) +
                                " deviations holding " + std::to_string(values) + " values");
  }
  fit.mean.assign(w.mean().begin(), w.mean().end());
  fit.variance.assign(w.variance().begin(), w.variance().end());
  fit.deviations.resize(rows, cols);
  std::copy(w.deviations().values().begin(), w.deviations().values().end(), fit.deviations.data());
  if (fit.method == BasinMethod::kLaplaceLastLayer) {
    CHORUS_ASSIGN_OR_RETURN(fit.laplace, FromWire(w.laplace(), where));
  }
  if (fit.method == BasinMethod::kCyclicalSgmcmc) {
    CHORUS_ASSIGN_OR_RETURN(fit.samples, FromWire(w.samples(), where + ": samples"));
  }
  return fit;
}

StatusOr<BundleMember> FromWire(const wire::Member& w, const std::string& source) {
  BundleMember m;
  m.index = w.index();
  m.seed = w.seed();
  m.weight = w.weight();
  m.parameters.assign(w.parameters().begin(), w.parameters().end());
  if (w.has_basin()) {
    CHORUS_ASSIGN_OR_RETURN(m.basin,
                            FromWire(w.basin(), source + ": member " + std::to_string(m.index)));
  }
  m.sample_seeds.assign(w.sample_seeds().begin(), w.sample_seeds().end());
  return m;
}

Preprocessing FromWire(const wire::Preprocessing& w) {
  Preprocessing p;
  p.format = w.format();
  p.target = w.target();
  int64_t numeric = 0;
  for (const wire::InputColumn& c : w.columns()) {
    const int64_t categorical = static_cast<int64_t>(p.plan.categorical.size());
    p.plan.columns.push_back(
        {c.name(), c.categorical(), c.categorical() ? categorical : numeric++});
    if (c.categorical()) {
      p.plan.categorical.push_back({c.name(), {c.vocabulary().begin(), c.vocabulary().end()}});
    }
  }
  p.standardizer.mean.assign(w.feature_mean().begin(), w.feature_mean().end());
  p.standardizer.scale.assign(w.feature_scale().begin(), w.feature_scale().end());
  p.target_mean = w.target_mean();
  p.target_scale = w.target_scale();
  return p;
}

DistributionSketch FromWire(const wire::DistributionSketch& w) {
  DistributionSketch s;
  s.values.assign(w.values().begin(), w.values().end());
  s.below.assign(w.below().begin(), w.below().end());
  s.upto.assign(w.upto().begin(), w.upto().end());
  return s;
}

TrainingSummary FromWire(const wire::TrainingSummary& w) {
  TrainingSummary s;
  s.rows = w.rows();
  for (const wire::ColumnSummary& c : w.columns()) {
    ColumnSummary column;
    column.name = c.name();
    column.categorical = c.categorical();
    column.numeric = FromWire(c.numeric());
    column.category_shares.assign(c.category_shares().begin(), c.category_shares().end());
    s.columns.push_back(std::move(column));
  }
  s.class_shares.assign(w.class_shares().begin(), w.class_shares().end());
  s.target = FromWire(w.target());
  return s;
}

// Members are converted one at a time and each message's memory freed after, so the weights are
// held about once, not twice, while the bundle is built.
StatusOr<Bundle> FromWire(wire::Bundle& w, const std::string& source) {
  Bundle b;
  CHORUS_ASSIGN_OR_RETURN(b.task, Parsed(ParseTask(w.task()), w.task(), "task", source));
  CHORUS_ASSIGN_OR_RETURN(
      b.activation, Parsed(ParseActivation(w.activation()), w.activation(), "activation", source));
  b.class_names.assign(w.class_names().begin(), w.class_names().end());
  b.preprocessing = FromWire(w.preprocessing());
  b.widths.assign(w.widths().begin(), w.widths().end());
  if (w.image_size() != 0 && w.image_size() != 3) {
    return Status::InvalidInput(source + ": image: expected channels, height and width, found " +
                                std::to_string(w.image_size()) + " values");
  }
  if (w.image_size() == 3) b.image = {w.image(0), w.image(1), w.image(2)};
  for (const wire::ConvStage& c : w.conv()) {
    CHORUS_ASSIGN_OR_RETURN(const Pooling pool, Parsed(ParsePooling(c.pool()), c.pool(), "conv.pool", source));
    b.conv.push_back({c.channels(), c.kernel(), pool});
  }
  for (wire::Member& m : *w.mutable_members()) {
    CHORUS_ASSIGN_OR_RETURN(BundleMember member, FromWire(m, source));
    b.members.push_back(std::move(member));
    wire::Member().Swap(&m);
  }
  b.basin_scale = w.basin_scale();
  b.temperature = w.temperature();
  b.run_name = w.run_name();
  b.chorus_version = w.chorus_version();
  b.data_hash = w.data_hash();
  b.config_hash = w.config_hash();
  for (const wire::Metric& m : w.test_metrics()) b.test_metrics.emplace_back(m.name(), m.value());
  if (w.has_training_summary()) b.training_summary = FromWire(w.training_summary());
  CHORUS_RETURN_IF_ERROR(CheckBundle(b, source));
  return b;
}

// ---- the frame ----

void PutLittleEndian(uint64_t value, int bytes, char* out) {
  for (int i = 0; i < bytes; ++i) out[i] = static_cast<char>((value >> (8 * i)) & 0xFF);
}

uint64_t GetLittleEndian(const char* in, int bytes) {
  uint64_t value = 0;
  for (int i = 0; i < bytes; ++i) value |= uint64_t{static_cast<uint8_t>(in[i])} << (8 * i);
  return value;
}

// Checks everything outside the payload; returns the frame's facts (bundle left empty).
StatusOr<BundleFile> CheckFrame(std::string_view bytes, const std::string& source) {
  const int64_t size = static_cast<int64_t>(bytes.size());
  if (size < kBundleHeaderBytes + kBundleChecksumBytes) {
    return Status::InvalidInput(source + ": truncated: " + std::to_string(size) +
                                " bytes, a bundle file has at least " +
                                std::to_string(kBundleHeaderBytes + kBundleChecksumBytes));
  }
  if (std::memcmp(bytes.data(), kMagic, sizeof kMagic) != 0) {
    return Status::InvalidInput(source + ": not a chorus bundle (bad magic bytes)");
  }
  BundleFile file;
  file.format_version = static_cast<uint32_t>(GetLittleEndian(bytes.data() + 8, 4));
  if (file.format_version != kBundleFormatVersion) {
    return Status::InvalidInput(source + ": bundle format version " +
                                std::to_string(file.format_version) + "; this chorus reads " +
                                "version " + std::to_string(kBundleFormatVersion));
  }
  const uint64_t declared = GetLittleEndian(bytes.data() + 12, 8);
  const int64_t held = size - kBundleHeaderBytes - kBundleChecksumBytes;
  if (declared > static_cast<uint64_t>(kMaxBundlePayloadBytes) ||
      declared != static_cast<uint64_t>(held)) {
    return Status::InvalidInput(
        source + ": " + (declared > static_cast<uint64_t>(held) ? "truncated" : "trailing bytes") +
        ": the header promises a " + std::to_string(declared) + "-byte payload, the file holds " +
        std::to_string(held));
  }
  file.payload_bytes = held;
  const std::string_view payload = bytes.substr(kBundleHeaderBytes, held);
  file.payload_sha256 = Sha256Hex(payload.data(), payload.size());
  if (file.payload_sha256 != bytes.substr(kBundleHeaderBytes + held)) {
    return Status::InvalidInput(source + ": checksum mismatch: the payload's SHA-256 is " +
                                file.payload_sha256 + ", not the one stored (file corrupted?)");
  }
  return file;
}

Status ParsePayload(std::string_view bytes, const BundleFile& frame, const std::string& source,
                    wire::Bundle* message) {
  if (!message->ParseFromArray(bytes.data() + kBundleHeaderBytes,
                               static_cast<int>(frame.payload_bytes))) {
    return Status::InvalidInput(source + ": the payload is not a bundle message");
  }
  return Status::Ok();
}

StatusOr<BundleFile> Decode(std::string_view bytes, const std::string& source) {
  CHORUS_ASSIGN_OR_RETURN(BundleFile file, CheckFrame(bytes, source));
  wire::Bundle message;
  CHORUS_RETURN_IF_ERROR(ParsePayload(bytes, file, source, &message));
  CHORUS_ASSIGN_OR_RETURN(file.bundle, FromWire(message, source));
  return file;
}

// A whole file in one allocation of its size, left uninitialised until read.
struct FileBytes {
  std::unique_ptr<char[]> data;
  size_t size = 0;
  std::string_view view() const { return {data.get(), size}; }
};

// Reads `path`, refusing a file over kMaxBundleFileBytes before reading it.
StatusOr<FileBytes> ReadBytes(const std::string& path) {
  std::unique_ptr<std::FILE, int (*)(std::FILE*)> file(std::fopen(path.c_str(), "rb"), std::fclose);
  struct stat info;
  if (file == nullptr || ::fstat(::fileno(file.get()), &info) != 0) {
    return Status::InvalidInput(path + ": cannot read file: " + std::strerror(errno));
  }
  if (info.st_size > kMaxBundleFileBytes) {
    return Status::InvalidInput(path + ": " + std::to_string(info.st_size) + " bytes, more " +
                                "than a bundle file can hold (" +
                                std::to_string(kMaxBundleFileBytes) + ")");
  }
  FileBytes bytes{std::unique_ptr<char[]>(new char[info.st_size]),
                  static_cast<size_t>(info.st_size)};
  if (std::fread(bytes.data.get(), 1, bytes.size, file.get()) != bytes.size) {
    return Status::InvalidInput(path + ": cannot read file: " + std::strerror(errno));
  }
  return bytes;
}

StatusOr<BundleFile> Read(const std::string& path) {
  CHORUS_ASSIGN_OR_RETURN(FileBytes bytes, ReadBytes(path));
  CHORUS_ASSIGN_OR_RETURN(BundleFile file, CheckFrame(bytes.view(), path));
  wire::Bundle message;
  CHORUS_RETURN_IF_ERROR(ParsePayload(bytes.view(), file, path, &message));
  bytes.data.reset();
  CHORUS_ASSIGN_OR_RETURN(file.bundle, FromWire(message, path));
  return file;
}

}  // namespace

std::string EncodeBundleFile(const Bundle& bundle) {
  wire::Bundle message;
  ToWire(bundle, &message);
  std::string bytes(kMagic, sizeof kMagic);
  bytes.resize(kBundleHeaderBytes);
  PutLittleEndian(kBundleFormatVersion, 4, &bytes[8]);
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    message.SerializeToCodedStream(&coded);
  }
  const int64_t payload = static_cast<int64_t>(bytes.size()) - kBundleHeaderBytes;
  PutLittleEndian(static_cast<uint64_t>(payload), 8, &bytes[12]);
  bytes += Sha256Hex(bytes.data() + kBundleHeaderBytes, static_cast<size_t>(payload));
  return bytes;
}

Status WriteBundleFile(const std::string& path, const Bundle& bundle) {
  const std::string bytes = EncodeBundleFile(bundle);
  if (static_cast<int64_t>(bytes.size()) > kMaxBundleFileBytes) {
    return Status::Internal(path + ": the bundle's payload exceeds " +
                            std::to_string(kMaxBundlePayloadBytes) + " bytes");
  }
  return WriteFileAtomic(path, bytes);
}

StatusOr<BundleFile> DecodeBundleFile(std::string_view bytes, const std::string& source) {
  try {
    return Decode(bytes, source);
  } catch (const std::exception& e) {
    return Status::Internal(source + ": decoding the bundle: " + e.what());
  }
}

StatusOr<BundleFile> ReadBundleFile(const std::string& path) {
  try {
    return Read(path);
  } catch (const std::exception& e) {
    return Status::Internal(path + ": reading the bundle: " + e.what());
  }
}

}  // namespace chorus

#include "proto/result_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <google/protobuf/wire_format_lite.h>

#include "job.pb.h"

namespace chorus {
namespace {

namespace io = google::protobuf::io;
using google::protobuf::internal::WireFormatLite;

// Field numbers of proto/job.proto.
enum MatrixField { kRows = 1, kCols = 2, kValues = 3 };
enum BasinField { kMethod = 1, kMean = 2, kVariance = 3, kDeviations = 4, kLaplace = 5, kSamples = 6 };
enum LaplaceField {
  kForm = 1, kOutputs = 2, kPriorPrecision = 3, kEigenvectors = 4, kEigenvalues = 5,
  kOutputEigenvectors = 6, kOutputEigenvalues = 7
};
enum ResultField {
  kFormatVersion = 1, kMemberIndex = 2, kSeed = 3, kDataHash = 4, kConfigHash = 5, kWidths = 6,
  kParameters = 7, kEpochLoss = 8, kValidationOutputs = 9, kTestOutputs = 10, kBasin = 11,
  kSampleSeeds = 12, kSampleValidationOutputs = 13, kSampleTestOutputs = 14, kRole = 15,
  kPoint = 16, kFold = 17, kValidationNll = 18, kBestEpoch = 19
};

// An int32 field as libprotobuf writes it: negative values sign-extended to 64 bits.
uint64_t Int32Varint(int v) { return static_cast<uint64_t>(static_cast<int64_t>(v)); }

uint32_t Tag(int field, WireFormatLite::WireType type) {
  return static_cast<uint32_t>(field) << 3 | static_cast<uint32_t>(type);
}

size_t VarintSize(uint64_t v) { return io::CodedOutputStream::VarintSize64(v); }

// Bytes of a length-delimited field with a payload of `payload` bytes: tag, length, payload.
size_t DelimitedSize(int field, size_t payload) {
  return VarintSize(Tag(field, WireFormatLite::WIRETYPE_LENGTH_DELIMITED)) + VarintSize(payload) + payload;
}

// The same, but proto3 leaves out an empty packed field or string entirely.
size_t PackedSize(int field, size_t payload) { return payload == 0 ? 0 : DelimitedSize(field, payload); }

void WriteDelimitedHeader(io::CodedOutputStream& out, int field, size_t payload) {
  out.WriteTag(Tag(field, WireFormatLite::WIRETYPE_LENGTH_DELIMITED));
  out.WriteVarint64(payload);
}

// A packed run of fixed-size little-endian values (float, double): left out when empty.
template <typename T>
void WritePacked(io::CodedOutputStream& out, int field, const T* values, size_t n) {
  if (n == 0) return;
  WriteDelimitedHeader(out, field, n * sizeof(T));
  out.WriteRaw(values, static_cast<int>(n * sizeof(T)));
}

// A varint field (proto3: left out when zero).
void WriteVarintField(io::CodedOutputStream& out, int field, uint64_t v) {
  if (v == 0) return;
  out.WriteTag(Tag(field, WireFormatLite::WIRETYPE_VARINT));
  out.WriteVarint64(v);
}

void WriteStringField(io::CodedOutputStream& out, int field, const std::string& s) {
  if (s.empty()) return;
  WriteDelimitedHeader(out, field, s.size());
  out.WriteRaw(s.data(), static_cast<int>(s.size()));
}

// A double field (proto3: left out when its bits are zero).
void WriteDoubleField(io::CodedOutputStream& out, int field, double v) {
  if (WireFormatLite::EncodeDouble(v) == 0) return;
  out.WriteTag(Tag(field, WireFormatLite::WIRETYPE_FIXED64));
  out.WriteLittleEndian64(WireFormatLite::EncodeDouble(v));
}

size_t DoubleFieldSize(double v) { return WireFormatLite::EncodeDouble(v) == 0 ? 0 : 1 + 8; }

// FloatMatrix {rows, cols, values}: the payload's size, and the payload.
size_t MatrixPayloadSize(const Matrix& m) {
  const auto rows = static_cast<uint64_t>(m.rows()), cols = static_cast<uint64_t>(m.cols());
  return (rows != 0 ? 1 + VarintSize(rows) : 0) + (cols != 0 ? 1 + VarintSize(cols) : 0) +
         PackedSize(kValues, static_cast<size_t>(m.size()) * sizeof(float));
}

// A FloatMatrix field; always present (as a set sub-message is, even when empty).
void WriteMatrixField(io::CodedOutputStream& out, int field, const Matrix& m) {
  WriteDelimitedHeader(out, field, MatrixPayloadSize(m));
  WriteVarintField(out, kRows, static_cast<uint64_t>(m.rows()));
  WriteVarintField(out, kCols, static_cast<uint64_t>(m.cols()));
  WritePacked(out, kValues, m.data(), static_cast<size_t>(m.size()));
}

// Writes a MemberResult as the JobResult message libprotobuf would serialise: fields in number
// order, proto3 defaults (zero, empty) left out, repeated scalars packed, set sub-messages always
// written. Size() is the byte count Write produces.
class JobResultWriter {
 public:
  JobResultWriter(const MemberResult& r, const std::vector<int>& widths,
                  const std::string& data_hash, const std::string& config_hash)
      : r_(r), widths_(widths), data_hash_(data_hash), config_hash_(config_hash),
        basin_(r.basin.method != BasinMethod::kNone),
        laplace_(r.basin.method == BasinMethod::kLaplaceLastLayer),
        collected_(r.basin.method == BasinMethod::kCyclicalSgmcmc),
        method_(basin_ ? BasinMethodName(r.basin.method) : ""),
        form_(laplace_ ? LaplaceFormName(r.basin.laplace.form) : ""), role_(JobRoleName(r.role)) {}

  size_t Size() const {
    size_t n = 1 + VarintSize(kJobResultFormatVersion) + VarintFieldSize(static_cast<uint64_t>(
        static_cast<int64_t>(r_.index))) + VarintFieldSize(r_.seed) +
        PackedSize(kDataHash, data_hash_.size()) + PackedSize(kConfigHash, config_hash_.size()) +
        PackedSize(kWidths, WidthsPayloadSize()) +
        PackedSize(kParameters, r_.parameters.size() * sizeof(float)) +
        PackedSize(kEpochLoss, r_.epoch_loss.size() * sizeof(double)) +
        DelimitedSize(kValidationOutputs, MatrixPayloadSize(r_.validation_outputs)) +
        DelimitedSize(kTestOutputs, MatrixPayloadSize(r_.test_outputs));
    if (basin_) {
      n += DelimitedSize(kBasin, BasinPayloadSize()) + PackedSize(kSampleSeeds, SeedsPayloadSize());
      for (const Matrix& m : r_.sample_validation_outputs) n += DelimitedSize(kSampleValidationOutputs, MatrixPayloadSize(m));
      for (const Matrix& m : r_.sample_test_outputs) n += DelimitedSize(kSampleTestOutputs, MatrixPayloadSize(m));
    }
    return n + PackedSize(kRole, role_.size()) + VarintFieldSize(Int32Varint(r_.point)) +
           VarintFieldSize(Int32Varint(r_.fold)) +
           PackedSize(kValidationNll, r_.validation_nll.size() * sizeof(double)) +
           VarintFieldSize(Int32Varint(r_.best_epoch));
  }

  void Write(io::CodedOutputStream& out) const {
    WriteVarintField(out, kFormatVersion, kJobResultFormatVersion);
    WriteVarintField(out, kMemberIndex, static_cast<uint64_t>(static_cast<int64_t>(r_.index)));
    WriteVarintField(out, kSeed, r_.seed);
    WriteStringField(out, kDataHash, data_hash_);
    WriteStringField(out, kConfigHash, config_hash_);
    if (!widths_.empty()) {
      WriteDelimitedHeader(out, kWidths, WidthsPayloadSize());
      for (int w : widths_) out.WriteVarint32SignExtended(w);
    }
    WritePacked(out, kParameters, r_.parameters.data(), r_.parameters.size());
    WritePacked(out, kEpochLoss, r_.epoch_loss.data(), r_.epoch_loss.size());
    WriteMatrixField(out, kValidationOutputs, r_.validation_outputs);
    WriteMatrixField(out, kTestOutputs, r_.test_outputs);
    if (basin_) WriteBasin(out);
    WriteStringField(out, kRole, role_);
    WriteVarintField(out, kPoint, Int32Varint(r_.point));
    WriteVarintField(out, kFold, Int32Varint(r_.fold));
    WritePacked(out, kValidationNll, r_.validation_nll.data(), r_.validation_nll.size());
    WriteVarintField(out, kBestEpoch, Int32Varint(r_.best_epoch));
  }

 private:
  void WriteBasin(io::CodedOutputStream& out) const {
    WriteDelimitedHeader(out, kBasin, BasinPayloadSize());
    WriteStringField(out, kMethod, method_);
    WritePacked(out, kMean, r_.basin.mean.data(), r_.basin.mean.size());
    WritePacked(out, kVariance, r_.basin.variance.data(), r_.basin.variance.size());
    WriteMatrixField(out, kDeviations, r_.basin.deviations);
    if (laplace_) WriteLaplace(out);
    if (collected_) WriteMatrixField(out, kSamples, r_.basin.samples);
    if (!r_.sample_seeds.empty()) {
      WriteDelimitedHeader(out, kSampleSeeds, SeedsPayloadSize());
      for (uint64_t s : r_.sample_seeds) out.WriteVarint64(s);
    }
    for (const Matrix& m : r_.sample_validation_outputs) WriteMatrixField(out, kSampleValidationOutputs, m);
    for (const Matrix& m : r_.sample_test_outputs) WriteMatrixField(out, kSampleTestOutputs, m);
  }

  void WriteLaplace(io::CodedOutputStream& out) const {
    const LaplaceFactors& f = r_.basin.laplace;
    WriteDelimitedHeader(out, kLaplace, LaplacePayloadSize());
    WriteStringField(out, kForm, form_);
    WriteVarintField(out, kOutputs, Int32Varint(f.outputs));
    WriteDoubleField(out, kPriorPrecision, f.prior_precision);
    WriteMatrixField(out, kEigenvectors, f.eigenvectors);
    WritePacked(out, kEigenvalues, f.eigenvalues.data(), f.eigenvalues.size());
    WriteMatrixField(out, kOutputEigenvectors, f.output_eigenvectors);
    WritePacked(out, kOutputEigenvalues, f.output_eigenvalues.data(), f.output_eigenvalues.size());
  }

  static size_t VarintFieldSize(uint64_t v) { return v == 0 ? 0 : 1 + VarintSize(v); }

  size_t LaplacePayloadSize() const {
    const LaplaceFactors& f = r_.basin.laplace;
    return PackedSize(kForm, form_.size()) + VarintFieldSize(Int32Varint(f.outputs)) +
           DoubleFieldSize(f.prior_precision) +
           DelimitedSize(kEigenvectors, MatrixPayloadSize(f.eigenvectors)) +
           PackedSize(kEigenvalues, f.eigenvalues.size() * sizeof(float)) +
           DelimitedSize(kOutputEigenvectors, MatrixPayloadSize(f.output_eigenvectors)) +
           PackedSize(kOutputEigenvalues, f.output_eigenvalues.size() * sizeof(float));
  }

  size_t WidthsPayloadSize() const {
    size_t n = 0;
    for (int w : widths_) n += io::CodedOutputStream::VarintSize32SignExtended(w);
    return n;
  }
  size_t SeedsPayloadSize() const {
    size_t n = 0;
    for (uint64_t s : r_.sample_seeds) n += VarintSize(s);
    return n;
  }
  size_t BasinPayloadSize() const {
    return PackedSize(kMethod, method_.size()) +
           PackedSize(kMean, r_.basin.mean.size() * sizeof(float)) +
           PackedSize(kVariance, r_.basin.variance.size() * sizeof(float)) +
           DelimitedSize(kDeviations, MatrixPayloadSize(r_.basin.deviations)) +
           (laplace_ ? DelimitedSize(kLaplace, LaplacePayloadSize()) : 0) +
           (collected_ ? DelimitedSize(kSamples, MatrixPayloadSize(r_.basin.samples)) : 0);
  }

  const MemberResult& r_;
  const std::vector<int>& widths_;
  const std::string& data_hash_;
  const std::string& config_hash_;
  const bool basin_;
  const bool laplace_;
  const bool collected_;
  const std::string method_;
  const std::string form_;
  const std::string role_;
};

// Hands each full buffer of a CopyingOutputStreamAdaptor to a ByteSink.
class SinkStream : public io::CopyingOutputStream {
 public:
  explicit SinkStream(const ByteSink& sink) : sink_(sink) {}
  bool Write(const void* buffer, int size) override {
    return sink_(static_cast<const char*>(buffer), static_cast<size_t>(size));
  }

 private:
  const ByteSink& sink_;
};

StatusOr<Matrix> FromWire(const wire::FloatMatrix& w, const std::string& what) {
  if (w.rows() < 0 || w.cols() < 0 || w.rows() * w.cols() != w.values_size()) {
    return Status::InvalidInput(what + ": matrix is " + std::to_string(w.rows()) + " x " +
                                std::to_string(w.cols()) + " but holds " +
                                std::to_string(w.values_size()) + " values");
  }
  Matrix m(w.rows(), w.cols());
  std::copy(w.values().begin(), w.values().end(), m.data());
  return m;
}

Status BasinFromWire(const wire::JobResult& msg, const std::string& source, MemberResult& r) {
  if (!msg.has_basin()) return Status::Ok();
  const std::optional<BasinMethod> method = ParseBasinMethod(msg.basin().method());
  if (!method || *method == BasinMethod::kNone) {
    return Status::InvalidInput(source + ": unknown basin method \"" + msg.basin().method() + "\"");
  }
  r.basin.method = *method;
  r.basin.mean.assign(msg.basin().mean().begin(), msg.basin().mean().end());
  r.basin.variance.assign(msg.basin().variance().begin(), msg.basin().variance().end());
  CHORUS_ASSIGN_OR_RETURN(r.basin.deviations, FromWire(msg.basin().deviations(), source));
  if (r.basin.method == BasinMethod::kLaplaceLastLayer) {
    const wire::LaplaceFactors& w = msg.basin().laplace();
    const std::optional<LaplaceForm> form = ParseLaplaceForm(w.form());
    if (!form) return Status::InvalidInput(source + ": unknown laplace form \"" + w.form() + "\"");
    LaplaceFactors& f = r.basin.laplace;
    f.form = *form;
    f.outputs = w.outputs();
    f.prior_precision = w.prior_precision();
    CHORUS_ASSIGN_OR_RETURN(f.eigenvectors, FromWire(w.eigenvectors(), source));
    f.eigenvalues.assign(w.eigenvalues().begin(), w.eigenvalues().end());
    CHORUS_ASSIGN_OR_RETURN(f.output_eigenvectors, FromWire(w.output_eigenvectors(), source));
    f.output_eigenvalues.assign(w.output_eigenvalues().begin(), w.output_eigenvalues().end());
    CHORUS_RETURN_IF_ERROR(CheckLaplaceFactors(r.basin, source));
  }
  if (r.basin.method == BasinMethod::kCyclicalSgmcmc) {
    CHORUS_ASSIGN_OR_RETURN(r.basin.samples, FromWire(msg.basin().samples(), source));
  }
  r.sample_seeds.assign(msg.sample_seeds().begin(), msg.sample_seeds().end());
  if (r.basin.method == BasinMethod::kCyclicalSgmcmc) {
    CHORUS_RETURN_IF_ERROR(CheckCollectedSamples(r.basin, r.sample_seeds, source));
  }
  for (const auto& m : msg.sample_validation_outputs()) {
    CHORUS_ASSIGN_OR_RETURN(Matrix v, FromWire(m, source));
    r.sample_validation_outputs.push_back(std::move(v));
  }
  for (const auto& m : msg.sample_test_outputs()) {
    CHORUS_ASSIGN_OR_RETURN(Matrix t, FromWire(m, source));
    r.sample_test_outputs.push_back(std::move(t));
  }
  if (r.sample_validation_outputs.size() != r.sample_seeds.size() ||
      r.sample_test_outputs.size() != r.sample_seeds.size()) {
    return Status::InvalidInput(source + ": sample outputs do not match the sample seeds");
  }
  return Status::Ok();
}

}  // namespace

std::string EncodeJobResult(const MemberResult& result, const std::vector<int>& widths,
                            const std::string& data_hash, const std::string& config_hash) {
  std::string bytes;
  bytes.reserve(JobResultWriter(result, widths, data_hash, config_hash).Size());
  WriteJobResult(result, widths, data_hash, config_hash, [&bytes](const char* data, size_t n) {
    bytes.append(data, n);
    return true;
  });
  return bytes;
}

bool WriteJobResult(const MemberResult& result, const std::vector<int>& widths,
                    const std::string& data_hash, const std::string& config_hash,
                    const ByteSink& sink) {
  SinkStream copying(sink);
  io::CopyingOutputStreamAdaptor stream(&copying, static_cast<int>(kResultPieceBytes));
  {
    io::CodedOutputStream coded(&stream);
    JobResultWriter(result, widths, data_hash, config_hash).Write(coded);
    coded.Trim();
    if (coded.HadError()) return false;
  }
  return stream.Flush();
}

StatusOr<MemberResult> DecodeJobResult(const std::string& bytes, const std::string& source,
                                       const std::string& expected_data_hash,
                                       const std::string& expected_config_hash) {
  wire::JobResult msg;
  if (!msg.ParseFromString(bytes)) return Status::InvalidInput(source + ": not a job result");
  if (msg.format_version() != kJobResultFormatVersion) {
    return Status::InvalidInput(source + ": job result format version " +
                                std::to_string(msg.format_version()) + ", expected " +
                                std::to_string(kJobResultFormatVersion));
  }
  if (msg.data_hash() != expected_data_hash || msg.config_hash() != expected_config_hash) {
    return Status::InvalidInput(source + ": result was made from other data or another config");
  }
  MemberResult r;
  r.index = msg.member_index();
  r.seed = msg.seed();
  const std::optional<JobRole> role = ParseJobRole(msg.role());
  if (!role) return Status::InvalidInput(source + ": unknown job role \"" + msg.role() + "\"");
  r.role = *role;
  r.point = msg.point();
  r.fold = msg.fold();
  r.validation_nll.assign(msg.validation_nll().begin(), msg.validation_nll().end());
  r.best_epoch = msg.best_epoch();
  r.parameters.assign(msg.parameters().begin(), msg.parameters().end());
  r.epoch_loss.assign(msg.epoch_loss().begin(), msg.epoch_loss().end());
  CHORUS_ASSIGN_OR_RETURN(r.validation_outputs, FromWire(msg.validation_outputs(), source));
  CHORUS_ASSIGN_OR_RETURN(r.test_outputs, FromWire(msg.test_outputs(), source));
  CHORUS_RETURN_IF_ERROR(BasinFromWire(msg, source, r));
  return r;
}

}  // namespace chorus

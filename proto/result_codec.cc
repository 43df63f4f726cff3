#include "proto/result_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>

#include "job.pb.h"

namespace chorus {
namespace {

void ToWire(const Matrix& m, wire::FloatMatrix* out) {
  out->set_rows(m.rows());
  out->set_cols(m.cols());
  out->mutable_values()->Add(m.data(), m.data() + m.size());
}

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

void BasinToWire(const MemberResult& r, wire::JobResult* msg) {
  if (r.basin.method == BasinMethod::kNone) return;
  wire::BasinFit* b = msg->mutable_basin();
  b->set_method(BasinMethodName(r.basin.method));
  b->mutable_mean()->Add(r.basin.mean.begin(), r.basin.mean.end());
  b->mutable_variance()->Add(r.basin.variance.begin(), r.basin.variance.end());
  ToWire(r.basin.deviations, b->mutable_deviations());
  msg->mutable_sample_seeds()->Add(r.sample_seeds.begin(), r.sample_seeds.end());
  for (const Matrix& m : r.sample_validation_outputs) ToWire(m, msg->add_sample_validation_outputs());
  for (const Matrix& m : r.sample_test_outputs) ToWire(m, msg->add_sample_test_outputs());
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
  r.sample_seeds.assign(msg.sample_seeds().begin(), msg.sample_seeds().end());
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
  wire::JobResult msg;
  msg.set_format_version(kJobResultFormatVersion);
  msg.set_member_index(result.index);
  msg.set_seed(result.seed);
  msg.set_data_hash(data_hash);
  msg.set_config_hash(config_hash);
  msg.mutable_widths()->Add(widths.begin(), widths.end());
  msg.mutable_parameters()->Add(result.parameters.begin(), result.parameters.end());
  msg.mutable_epoch_loss()->Add(result.epoch_loss.begin(), result.epoch_loss.end());
  ToWire(result.validation_outputs, msg.mutable_validation_outputs());
  ToWire(result.test_outputs, msg.mutable_test_outputs());
  BasinToWire(result, &msg);
  std::string bytes;
  google::protobuf::io::StringOutputStream stream(&bytes);
  google::protobuf::io::CodedOutputStream coded(&stream);
  coded.SetSerializationDeterministic(true);
  msg.SerializeToCodedStream(&coded);
  coded.Trim();
  return bytes;
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
  r.parameters.assign(msg.parameters().begin(), msg.parameters().end());
  r.epoch_loss.assign(msg.epoch_loss().begin(), msg.epoch_loss().end());
  CHORUS_ASSIGN_OR_RETURN(r.validation_outputs, FromWire(msg.validation_outputs(), source));
  CHORUS_ASSIGN_OR_RETURN(r.test_outputs, FromWire(msg.test_outputs(), source));
  CHORUS_RETURN_IF_ERROR(BasinFromWire(msg, source, r));
  return r;
}

}  // namespace chorus

#include "proto/data_codec.h"

#include <cstring>

#include "data.pb.h"

namespace chorus {
namespace {

void SplitToWire(const Split& s, wire::SplitData* out) {
  out->set_rows(s.x.rows());
  out->set_cols(s.x.cols());
  out->set_features(std::string(reinterpret_cast<const char*>(s.x.data()),
                                static_cast<size_t>(s.x.size()) * sizeof(float)));
  out->mutable_labels()->Add(s.labels.begin(), s.labels.end());
  out->mutable_targets()->Add(s.targets.begin(), s.targets.end());
}

StatusOr<Split> SplitFromWire(const wire::SplitData& w, const std::string& what) {
  const bool shape_ok = w.rows() >= 0 && w.cols() >= 0 && w.cols() < (int64_t{1} << 24) &&
                        static_cast<uint64_t>(w.features().size()) ==
                            static_cast<uint64_t>(w.rows()) * w.cols() * sizeof(float);
  if (!shape_ok) return Status::InvalidInput(what + ": feature bytes do not match the shape");
  if ((w.labels_size() != 0 && w.labels_size() != w.rows()) ||
      (w.targets_size() != 0 && w.targets_size() != w.rows())) {
    return Status::InvalidInput(what + ": label or target count does not match the rows");
  }
  Split s;
  s.x.resize(w.rows(), w.cols());
  std::memcpy(s.x.data(), w.features().data(), w.features().size());
  s.labels.assign(w.labels().begin(), w.labels().end());
  s.targets.assign(w.targets().begin(), w.targets().end());
  return s;
}

}  // namespace

std::string EncodePreparedData(const PreparedData& data) {
  wire::PreparedDataSet msg;
  msg.set_format_version(kDataFormatVersion);
  msg.set_task(TaskName(data.task));
  msg.set_hash(data.hash);
  msg.mutable_class_names()->Add(data.class_names.begin(), data.class_names.end());
  msg.mutable_feature_names()->Add(data.feature_names.begin(), data.feature_names.end());
  msg.set_target_mean(data.target_mean);
  msg.set_target_scale(data.target_scale);
  SplitToWire(data.train, msg.mutable_train());
  SplitToWire(data.validation, msg.mutable_validation());
  SplitToWire(data.test, msg.mutable_test());
  return msg.SerializeAsString();
}

StatusOr<PreparedData> DecodePreparedData(const std::string& bytes, const std::string& source,
                                          const std::string& expected_hash) {
  wire::PreparedDataSet msg;
  if (!msg.ParseFromString(bytes)) return Status::InvalidInput(source + ": not a prepared data set");
  if (msg.format_version() != kDataFormatVersion) {
    return Status::InvalidInput(source + ": data format version " + std::to_string(msg.format_version()));
  }
  if (!expected_hash.empty() && msg.hash() != expected_hash) {
    return Status::InvalidInput(source + ": data hash " + msg.hash() + ", expected " + expected_hash);
  }
  const std::optional<Task> task = ParseTask(msg.task());
  if (!task) return Status::InvalidInput(source + ": unknown task \"" + msg.task() + "\"");
  PreparedData d;
  d.task = *task;
  d.hash = msg.hash();
  d.class_names.assign(msg.class_names().begin(), msg.class_names().end());
  d.feature_names.assign(msg.feature_names().begin(), msg.feature_names().end());
  d.target_mean = msg.target_mean();
  d.target_scale = msg.target_scale();
  CHORUS_ASSIGN_OR_RETURN(d.train, SplitFromWire(msg.train(), source + ": train"));
  CHORUS_ASSIGN_OR_RETURN(d.validation, SplitFromWire(msg.validation(), source + ": validation"));
  CHORUS_ASSIGN_OR_RETURN(d.test, SplitFromWire(msg.test(), source + ": test"));
  if (d.validation.x.cols() != d.train.x.cols() || d.test.x.cols() != d.train.x.cols()) {
    return Status::InvalidInput(source + ": splits have different feature counts");
  }
  return d;
}

}  // namespace chorus

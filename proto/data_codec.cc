#include "proto/data_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <google/protobuf/wire_format_lite.h>

#include <climits>
#include <cstdio>
#include <cstdlib>
#include <cstring>

#include "common/huge_pages.h"
#include "data.pb.h"

namespace chorus {
namespace {

using google::protobuf::internal::WireFormatLite;
using google::protobuf::io::CodedInputStream;
using WireType = WireFormatLite::WireType;

constexpr int64_t kMaxCols = int64_t{1} << 24;

// The packed varint bytes of `values`.
size_t PackedInt32Bytes(const std::vector<int32_t>& values) {
  size_t n = 0;
  for (const int32_t v : values) n += WireFormatLite::Int32Size(v);
  return n;
}

// One SplitData message's bytes after its tag and length, as protobuf serialises them (proto3:
// zero and empty fields are left out; labels and targets packed).
size_t SplitBodyBytes(const Split& s) {
  using google::protobuf::io::CodedOutputStream;
  size_t n = 0;
  if (s.x.rows() != 0) n += 1 + CodedOutputStream::VarintSize64(static_cast<uint64_t>(s.x.rows()));
  if (s.x.cols() != 0) n += 1 + CodedOutputStream::VarintSize64(static_cast<uint64_t>(s.x.cols()));
  const size_t feature_bytes = static_cast<size_t>(s.x.size()) * sizeof(float);
  if (feature_bytes != 0) n += 1 + CodedOutputStream::VarintSize64(feature_bytes) + feature_bytes;
  if (!s.labels.empty()) {
    const size_t label_bytes = PackedInt32Bytes(s.labels);
    n += 1 + CodedOutputStream::VarintSize64(label_bytes) + label_bytes;
  }
  if (!s.targets.empty()) {
    const size_t target_bytes = s.targets.size() * sizeof(float);
    n += 1 + CodedOutputStream::VarintSize64(target_bytes) + target_bytes;
  }
  return n;
}

// Writes split `s` as field `field` of PreparedDataSet at `to`, straight from its matrix
// (building a wire::SplitData would copy the features twice more); returns the end.
uint8_t* WriteSplit(int field, const Split& s, uint8_t* to) {
  using google::protobuf::io::CodedOutputStream;
  const auto raw = [&](int number, const void* data, size_t bytes) {
    to = WireFormatLite::WriteTagToArray(number, WireFormatLite::WIRETYPE_LENGTH_DELIMITED, to);
    to = CodedOutputStream::WriteVarint64ToArray(bytes, to);
    std::memcpy(to, data, bytes);
    to += bytes;
  };
  to = WireFormatLite::WriteTagToArray(field, WireFormatLite::WIRETYPE_LENGTH_DELIMITED, to);
  to = CodedOutputStream::WriteVarint64ToArray(SplitBodyBytes(s), to);
  if (s.x.rows() != 0) to = WireFormatLite::WriteInt64ToArray(1, s.x.rows(), to);
  if (s.x.cols() != 0) to = WireFormatLite::WriteInt64ToArray(2, s.x.cols(), to);
  if (s.x.size() != 0) raw(3, s.x.data(), static_cast<size_t>(s.x.size()) * sizeof(float));
  if (!s.labels.empty()) {
    to = WireFormatLite::WriteTagToArray(4, WireFormatLite::WIRETYPE_LENGTH_DELIMITED, to);
    to = CodedOutputStream::WriteVarint64ToArray(PackedInt32Bytes(s.labels), to);
    for (const int32_t v : s.labels) to = WireFormatLite::WriteInt32NoTagToArray(v, to);
  }
  if (!s.targets.empty()) raw(5, s.targets.data(), s.targets.size() * sizeof(float));
  return to;
}

// rows x cols float32 is exactly `bytes` bytes (and the shape is one the decoder accepts).
bool ShapeMatches(int64_t rows, int64_t cols, uint64_t bytes) {
  if (rows < 0 || cols < 0 || cols >= kMaxCols || rows > (int64_t{1} << 40)) return false;
  return static_cast<uint64_t>(rows) * static_cast<uint64_t>(cols) * sizeof(float) == bytes;
}

// A repeated int32 field occurrence, packed (one length-delimited run of varints) or not.
bool ReadInt32s(CodedInputStream& in, WireType type, std::vector<int32_t>* out) {
  uint32_t v = 0;
  if (type == WireFormatLite::WIRETYPE_VARINT) {
    if (!in.ReadVarint32(&v)) return false;
    out->push_back(static_cast<int32_t>(v));
    return true;
  }
  int length = 0;
  if (!in.ReadVarintSizeAsInt(&length)) return false;
  const CodedInputStream::Limit limit = in.PushLimit(length);
  while (in.BytesUntilLimit() > 0) {
    if (!in.ReadVarint32(&v)) return false;
    out->push_back(static_cast<int32_t>(v));
  }
  in.PopLimit(limit);
  return true;
}

// A repeated float field occurrence, packed (little-endian float32 run) or not.
bool ReadFloats(CodedInputStream& in, WireType type, std::vector<float>* out) {
  uint32_t bits = 0;
  if (type == WireFormatLite::WIRETYPE_FIXED32) {
    if (!in.ReadLittleEndian32(&bits)) return false;
    float f;
    std::memcpy(&f, &bits, sizeof f);
    out->push_back(f);
    return true;
  }
  int length = 0;
  if (!in.ReadVarintSizeAsInt(&length) || length % 4 != 0) return false;
  const size_t old = out->size();
  out->resize(old + static_cast<size_t>(length) / 4);
  return in.ReadRaw(out->data() + old, length);
}

// Decodes one SplitData message (its length prefix first). The feature bytes go straight into
// s->x when the shape read so far fits them (the encoder writes rows and cols first); otherwise
// they wait in a string and are copied once the shape is known.
class SplitReader {
 public:
  bool Read(CodedInputStream& in, Split* s) {
    int length = 0;
    if (!in.ReadVarintSizeAsInt(&length)) return false;
    const CodedInputStream::Limit limit = in.PushLimit(length);
    while (const uint32_t tag = in.ReadTag()) {
      if (!Field(in, tag, s)) return false;
    }
    if (!in.ConsumedEntireMessage()) return false;
    in.PopLimit(limit);
    return true;
  }

  // After Read: gives s->x the decoded shape. False if the feature bytes do not fit it.
  bool Finish(Split* s) {
    if (!ShapeMatches(rows_, cols_, feature_bytes_)) return false;
    if (!pending_ && s->x.rows() == rows_ && s->x.cols() == cols_) return true;
    Matrix x(rows_, cols_);
    const void* from = pending_ ? static_cast<const void*>(pending_bytes_.data()) : s->x.data();
    if (feature_bytes_ > 0) std::memcpy(x.data(), from, feature_bytes_);
    s->x = std::move(x);
    return true;
  }

 private:
  bool Field(CodedInputStream& in, uint32_t tag, Split* s) {
    const WireType type = WireFormatLite::GetTagWireType(tag);
    uint64_t v = 0;
    switch (WireFormatLite::GetTagFieldNumber(tag)) {
      case 1:
        if (type != WireFormatLite::WIRETYPE_VARINT) break;
        if (!in.ReadVarint64(&v)) return false;
        rows_ = static_cast<int64_t>(v);
        return true;
      case 2:
        if (type != WireFormatLite::WIRETYPE_VARINT) break;
        if (!in.ReadVarint64(&v)) return false;
        cols_ = static_cast<int64_t>(v);
        return true;
      case 3:
        if (type != WireFormatLite::WIRETYPE_LENGTH_DELIMITED) break;
        return Features(in, s);
      case 4:
        if (type != WireFormatLite::WIRETYPE_VARINT && type != WireFormatLite::WIRETYPE_LENGTH_DELIMITED) break;
        return ReadInt32s(in, type, &s->labels);
      case 5:
        if (type != WireFormatLite::WIRETYPE_FIXED32 && type != WireFormatLite::WIRETYPE_LENGTH_DELIMITED) break;
        return ReadFloats(in, type, &s->targets);
      default:
        break;
    }
    return WireFormatLite::SkipField(&in, tag);
  }

  bool Features(CodedInputStream& in, Split* s) {
    int length = 0;
    if (!in.ReadVarintSizeAsInt(&length)) return false;
    feature_bytes_ = static_cast<uint64_t>(length);
    pending_bytes_.clear();
    pending_ = !ShapeMatches(rows_, cols_, feature_bytes_);
    if (pending_) return in.ReadString(&pending_bytes_, length);
    s->x.resize(rows_, cols_);
    AdviseHugePages(s->x.data(), feature_bytes_);
    return in.ReadRaw(s->x.data(), length);
  }

  int64_t rows_ = 0, cols_ = 0;
  uint64_t feature_bytes_ = 0;  // length of the last features field (proto3: the last one wins)
  bool pending_ = false;        // the last features field is in pending_bytes_, not in s->x
  std::string pending_bytes_;
};

Status ReadSplit(CodedInputStream& in, const std::string& what, Split* s) {
  *s = Split();
  SplitReader reader;
  if (!reader.Read(in, s)) return Status::InvalidInput(what + ": truncated or not a prepared data set");
  if (!reader.Finish(s)) return Status::InvalidInput(what + ": feature bytes do not match the shape");
  const auto rows = static_cast<size_t>(s->x.rows());
  if ((!s->labels.empty() && s->labels.size() != rows) ||
      (!s->targets.empty() && s->targets.size() != rows)) {
    return Status::InvalidInput(what + ": label or target count does not match the rows");
  }
  return Status::Ok();
}

// Decodes the PreparedDataSet fields into d; version and task land in the out-parameters.
Status ReadDataSet(CodedInputStream& in, const std::string& source, PreparedData* d,
                   uint32_t* version, std::string* task) {
  const Status not_data = Status::InvalidInput(source + ": not a prepared data set");
  while (const uint32_t tag = in.ReadTag()) {
    const int field = WireFormatLite::GetTagFieldNumber(tag);
    const bool len = WireFormatLite::GetTagWireType(tag) == WireFormatLite::WIRETYPE_LENGTH_DELIMITED;
    const bool fixed32 = WireFormatLite::GetTagWireType(tag) == WireFormatLite::WIRETYPE_FIXED32;
    bool ok = true;
    if (field == 1 && WireFormatLite::GetTagWireType(tag) == WireFormatLite::WIRETYPE_VARINT) {
      ok = in.ReadVarint32(version);
    } else if (field == 2 && len) {
      ok = WireFormatLite::ReadString(&in, task);
    } else if (field == 3 && len) {
      ok = WireFormatLite::ReadString(&in, &d->hash);
    } else if ((field == 4 || field == 5) && len) {
      std::vector<std::string>& names = field == 4 ? d->class_names : d->feature_names;
      names.emplace_back();
      ok = WireFormatLite::ReadString(&in, &names.back());
    } else if ((field == 6 || field == 7) && fixed32) {
      ok = WireFormatLite::ReadPrimitive<float, WireFormatLite::TYPE_FLOAT>(
          &in, field == 6 ? &d->target_mean : &d->target_scale);
    } else if (field >= 8 && field <= 10 && len) {
      const char* names[] = {"train", "validation", "test"};
      Split* splits[] = {&d->train, &d->validation, &d->test};
      CHORUS_RETURN_IF_ERROR(ReadSplit(in, source + ": " + names[field - 8], splits[field - 8]));
    } else {
      ok = WireFormatLite::SkipField(&in, tag);
    }
    if (!ok) return not_data;
  }
  return in.ConsumedEntireMessage() ? Status::Ok() : not_data;
}

}  // namespace

std::string EncodePreparedData(const PreparedData& data) {
  using google::protobuf::io::CodedOutputStream;
  wire::PreparedDataSet header;  // the fields before the splits
  header.set_format_version(kDataFormatVersion);
  header.set_task(TaskName(data.task));
  header.set_hash(data.hash);
  header.mutable_class_names()->Add(data.class_names.begin(), data.class_names.end());
  header.mutable_feature_names()->Add(data.feature_names.begin(), data.feature_names.end());
  header.set_target_mean(data.target_mean);
  header.set_target_scale(data.target_scale);
  const Split* splits[] = {&data.train, &data.validation, &data.test};
  size_t total = header.ByteSizeLong();
  for (const Split* s : splits) {
    const size_t body = SplitBodyBytes(*s);
    total += 1 + CodedOutputStream::VarintSize64(body) + body;
  }
  std::string bytes;
  bytes.reserve(total);
  AdviseHugePages(bytes.data(), total);
  bytes.resize(total);
  uint8_t* const begin = reinterpret_cast<uint8_t*>(bytes.data());
  uint8_t* to = header.SerializeWithCachedSizesToArray(begin);
  for (int i = 0; i < 3; ++i) to = WriteSplit(8 + i, *splits[i], to);
  if (to != begin + total) {  // SplitBodyBytes and WriteSplit disagree: a bug, not bad input
    std::fprintf(stderr, "EncodePreparedData: wrote %td of %zu bytes\n", to - begin, total);
    std::abort();
  }
  return bytes;
}

StatusOr<PreparedData> DecodePreparedData(const std::string& bytes, const std::string& source,
                                          const std::string& expected_hash) {
  if (bytes.size() > static_cast<size_t>(INT_MAX)) {
    return Status::InvalidInput(source + ": not a prepared data set (over 2 GiB)");
  }
  google::protobuf::io::ArrayInputStream in(bytes.data(), static_cast<int>(bytes.size()));
  return DecodePreparedData(&in, source, expected_hash);
}

StatusOr<PreparedData> DecodePreparedData(google::protobuf::io::ZeroCopyInputStream* stream,
                                          const std::string& source,
                                          const std::string& expected_hash) {
  CodedInputStream in(stream);
  PreparedData d;
  uint32_t version = 0;
  std::string task_name;
  CHORUS_RETURN_IF_ERROR(ReadDataSet(in, source, &d, &version, &task_name));
  if (version != kDataFormatVersion) {
    return Status::InvalidInput(source + ": data format version " + std::to_string(version));
  }
  if (!expected_hash.empty() && d.hash != expected_hash) {
    return Status::InvalidInput(source + ": data hash " + d.hash + ", expected " + expected_hash);
  }
  const std::optional<Task> task = ParseTask(task_name);
  if (!task) return Status::InvalidInput(source + ": unknown task \"" + task_name + "\"");
  d.task = *task;
  if (d.validation.x.cols() != d.train.x.cols() || d.test.x.cols() != d.train.x.cols()) {
    return Status::InvalidInput(source + ": splits have different feature counts");
  }
  return d;
}

int64_t PreparedDataBytes(const PreparedData& data) {
  int64_t bytes = 0;
  for (const Split* s : {&data.train, &data.validation, &data.test}) {
    bytes += static_cast<int64_t>(s->x.size()) * static_cast<int64_t>(sizeof(float)) +
             static_cast<int64_t>(s->labels.size() * sizeof(int32_t) + s->targets.size() * sizeof(float));
  }
  return bytes;
}

}  // namespace chorus

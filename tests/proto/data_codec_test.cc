// proto/data_codec: the streaming decoder gives back exactly what was encoded, however the bytes
// are cut into pieces, and refuses what does not fit.
#include "proto/data_codec.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <gtest/gtest.h>

#include "common/config.h"
#include "common/rng.h"
#include "data.pb.h"

namespace chorus {
namespace data_codec_test {

Split RandomSplit(Philox& rng, int64_t rows, int64_t cols, bool classify) {
  Split s;
  s.x.resize(rows, cols);
  for (int64_t i = 0; i < s.x.size(); ++i) s.x.data()[i] = static_cast<float>(rng.NextNormal());
  for (int64_t r = 0; r < rows; ++r) {
    if (classify) s.labels.push_back(static_cast<int32_t>(rng.NextBelow(3)));
    else s.targets.push_back(static_cast<float>(rng.NextNormal()));
  }
  return s;
}

PreparedData RandomData(uint64_t seed, Task task) {
  Philox rng(seed);
  PreparedData d;
  d.task = task;
  d.hash = std::string(64, 'c');
  d.class_names = task == Task::kClassification ? std::vector<std::string>{"a", "b", "c"}
                                                : std::vector<std::string>{};
  d.feature_names = {"x0", "x1", "x2", "site=north", "site=south"};
  d.target_mean = 1.5f;
  d.target_scale = 0.25f;
  const bool classify = task == Task::kClassification;
  d.train = RandomSplit(rng, 300, 5, classify);
  d.validation = RandomSplit(rng, 31, 5, classify);
  d.test = RandomSplit(rng, 47, 5, classify);
  return d;
}

void ExpectSameSplit(const Split& a, const Split& b) {
  ASSERT_EQ(a.x.rows(), b.x.rows());
  ASSERT_EQ(a.x.cols(), b.x.cols());
  EXPECT_TRUE(a.x == b.x);
  EXPECT_EQ(a.labels, b.labels);
  EXPECT_EQ(a.targets, b.targets);
}

void ExpectSameData(const PreparedData& a, const PreparedData& b) {
  EXPECT_EQ(a.task, b.task);
  EXPECT_EQ(a.hash, b.hash);
  EXPECT_EQ(a.class_names, b.class_names);
  EXPECT_EQ(a.feature_names, b.feature_names);
  EXPECT_EQ(a.target_mean, b.target_mean);
  EXPECT_EQ(a.target_scale, b.target_scale);
  ExpectSameSplit(a.train, b.train);
  ExpectSameSplit(a.validation, b.validation);
  ExpectSameSplit(a.test, b.test);
}

TEST(DataCodecTest, StreamDecodingGivesTheEncodedDataBackWhateverThePieceSize) {
  for (Task task : {Task::kClassification, Task::kRegression}) {
    const PreparedData d = RandomData(static_cast<uint64_t>(task) + 1, task);
    const std::string bytes = EncodePreparedData(d);
    for (int piece : {1, 3, 7, 4096, -1}) {  // -1: the whole buffer at once
      SCOPED_TRACE("piece " + std::to_string(piece));
      google::protobuf::io::ArrayInputStream in(bytes.data(), static_cast<int>(bytes.size()), piece);
      StatusOr<PreparedData> back = DecodePreparedData(&in, "test", d.hash);
      ASSERT_TRUE(back.ok()) << back.status().ToString();
      ExpectSameData(d, back.value());
    }
    StatusOr<PreparedData> from_string = DecodePreparedData(bytes, "test", "");
    ASSERT_TRUE(from_string.ok()) << from_string.status().ToString();
    ExpectSameData(d, from_string.value());
  }
}

// The reference encoding: libprotobuf serialising the generated wire::PreparedDataSet.
std::string LibprotobufBytes(const PreparedData& d) {
  wire::PreparedDataSet msg;
  msg.set_format_version(kDataFormatVersion);
  msg.set_task(TaskName(d.task));
  msg.set_hash(d.hash);
  msg.mutable_class_names()->Add(d.class_names.begin(), d.class_names.end());
  msg.mutable_feature_names()->Add(d.feature_names.begin(), d.feature_names.end());
  msg.set_target_mean(d.target_mean);
  msg.set_target_scale(d.target_scale);
  const std::pair<const Split*, wire::SplitData*> splits[] = {
      {&d.train, msg.mutable_train()}, {&d.validation, msg.mutable_validation()}, {&d.test, msg.mutable_test()}};
  for (const auto& [s, out] : splits) {
    out->set_rows(s->x.rows());
    out->set_cols(s->x.cols());
    out->set_features(std::string(reinterpret_cast<const char*>(s->x.data()), s->x.size() * sizeof(float)));
    out->mutable_labels()->Add(s->labels.begin(), s->labels.end());
    out->mutable_targets()->Add(s->targets.begin(), s->targets.end());
  }
  return msg.SerializeAsString();
}

TEST(DataCodecTest, EncodingIsLibprotobufsByteForByte) {
  // EncodePreparedData writes the wire format itself (straight from the matrices); libprotobuf's
  // serialisation of the same message is the reference, including empty splits, zero targets
  // scale, negative labels (ten-byte varints) and a split with rows but no columns.
  PreparedData c = RandomData(9, Task::kClassification);
  c.train.labels[0] = -1;
  c.train.labels[1] = 300;
  c.validation = Split();
  EXPECT_EQ(EncodePreparedData(c), LibprotobufBytes(c));
  PreparedData r = RandomData(10, Task::kRegression);
  r.target_mean = 0.0f;
  r.test.x.resize(4, 0);
  r.test.targets = {0.0f, 1.0f, -2.0f, 3.5f};
  EXPECT_EQ(EncodePreparedData(r), LibprotobufBytes(r));
}

TEST(DataCodecTest, FeaturesBeforeTheShapeStillDecode) {
  // libprotobuf writes rows and cols first; a writer that puts the feature bytes first is valid
  // protobuf too. Hand-written: train = {features, labels, rows, cols}.
  Philox rng(11);
  PreparedData d = RandomData(3, Task::kClassification);
  std::string bytes = EncodePreparedData(d);  // then a second train field replaces the first
  std::string split;
  {
    google::protobuf::io::StringOutputStream stream(&split);
    google::protobuf::io::CodedOutputStream out(&stream);
    d.train = RandomSplit(rng, 4, 5, true);
    out.WriteTag(3 << 3 | 2);
    out.WriteVarint32(4 * 5 * 4);
    out.WriteRaw(d.train.x.data(), 4 * 5 * 4);
    for (int32_t label : d.train.labels) {
      out.WriteTag(4 << 3 | 0);
      out.WriteVarint32(static_cast<uint32_t>(label));
    }
    out.WriteTag(1 << 3 | 0);
    out.WriteVarint32(4);
    out.WriteTag(2 << 3 | 0);
    out.WriteVarint32(5);
  }
  bytes += static_cast<char>(8 << 3 | 2);
  bytes += static_cast<char>(split.size());
  ASSERT_LT(split.size(), 128u);
  bytes += split;
  StatusOr<PreparedData> back = DecodePreparedData(bytes, "test", d.hash);
  ASSERT_TRUE(back.ok()) << back.status().ToString();
  ExpectSameData(d, back.value());
}

TEST(DataCodecTest, RefusesTruncatedBytesWrongShapesVersionsAndHashes) {
  const PreparedData d = RandomData(5, Task::kClassification);
  const std::string bytes = EncodePreparedData(d);
  // Cut inside the train features (they make up most of the bytes).
  StatusOr<PreparedData> cut = DecodePreparedData(bytes.substr(0, bytes.size() / 2), "cut", "");
  EXPECT_EQ(cut.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(cut.status().message().find("cut: train"), std::string::npos) << cut.status().ToString();
  EXPECT_EQ(DecodePreparedData(bytes, "x", std::string(64, 'd')).status().code(), Status::Code::kInvalidInput);

  wire::PreparedDataSet msg;
  ASSERT_TRUE(msg.ParseFromString(bytes));
  msg.mutable_test()->set_rows(48);  // features hold 47 rows
  StatusOr<PreparedData> shape = DecodePreparedData(msg.SerializeAsString(), "x", "");
  EXPECT_NE(shape.status().message().find("x: test: feature bytes do not match the shape"), std::string::npos)
      << shape.status().ToString();
  msg.mutable_test()->set_rows(47);
  msg.mutable_test()->add_labels(1);  // one label too many
  EXPECT_EQ(DecodePreparedData(msg.SerializeAsString(), "x", "").status().code(), Status::Code::kInvalidInput);
  msg.mutable_test()->mutable_labels()->RemoveLast();
  msg.set_format_version(kDataFormatVersion + 1);
  StatusOr<PreparedData> version = DecodePreparedData(msg.SerializeAsString(), "x", "");
  EXPECT_NE(version.status().message().find("data format version 2"), std::string::npos);
  msg.set_format_version(kDataFormatVersion);
  EXPECT_TRUE(DecodePreparedData(msg.SerializeAsString(), "x", "").ok());
}

TEST(DataCodecTest, DataBytesCountFeaturesLabelsAndTargets) {
  const PreparedData c = RandomData(7, Task::kClassification);
  EXPECT_EQ(PreparedDataBytes(c), (300 + 31 + 47) * (5 * 4 + 4));
  const PreparedData r = RandomData(7, Task::kRegression);
  EXPECT_EQ(PreparedDataBytes(r), (300 + 31 + 47) * (5 * 4 + 4));
}

}  // namespace data_codec_test
}  // namespace chorus

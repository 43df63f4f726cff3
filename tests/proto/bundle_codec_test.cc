// The bundle file: exact round trips, the documented byte layout (docs/bundle_format.md), and
// refusal of truncated, corrupted, wrong-version and absurd files before anything large is
// allocated.
#include "proto/bundle_codec.h"

#include <gtest/gtest.h>

#include <cstring>
#include <functional>
#include <string>

#include "bundle.pb.h"
#include "common/predictor.h"
#include "common/sha256.h"
#include "tests/testing/reference.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace bundle_codec_test {

using testing::SyntheticBundle;
using testing::SyntheticBundleSpec;

std::string Frame(const std::string& payload, uint32_t version = kBundleFormatVersion) {
  return testing::FrameBundlePayload(payload, version);
}

std::string PayloadOf(const std::string& file) {
  return file.substr(kBundleHeaderBytes, file.size() - kBundleHeaderBytes - kBundleChecksumBytes);
}

Status DecodeStatus(const std::string& bytes) { return DecodeBundleFile(bytes, "b").status(); }

// Decodes the framed `payload` after `mutate` changed its message.
Status DecodeMutated(const std::string& payload, const std::function<void(bundle::Bundle&)>& mutate) {
  bundle::Bundle message;
  if (!message.ParseFromString(payload)) return Status::Internal("the good payload did not parse");
  mutate(message);
  return DecodeStatus(Frame(message.SerializeAsString()));
}

void ExpectSameBundle(const Bundle& a, const Bundle& b) {
  EXPECT_EQ(a.task, b.task);
  EXPECT_EQ(a.class_names, b.class_names);
  EXPECT_EQ(a.preprocessing.format, b.preprocessing.format);
  EXPECT_EQ(a.preprocessing.target, b.preprocessing.target);
  EXPECT_EQ(a.preprocessing.plan.FeatureNames(), b.preprocessing.plan.FeatureNames());
  EXPECT_EQ(a.preprocessing.standardizer.mean, b.preprocessing.standardizer.mean);
  EXPECT_EQ(a.preprocessing.standardizer.scale, b.preprocessing.standardizer.scale);
  EXPECT_EQ(a.widths, b.widths);
  ASSERT_EQ(a.members.size(), b.members.size());
  for (size_t m = 0; m < a.members.size(); ++m) {
    EXPECT_EQ(a.members[m].weight, b.members[m].weight);
    EXPECT_EQ(a.members[m].parameters, b.members[m].parameters);
    EXPECT_EQ(a.members[m].basin.method, b.members[m].basin.method);
    EXPECT_EQ(a.members[m].basin.mean, b.members[m].basin.mean);
    EXPECT_EQ(a.members[m].basin.variance, b.members[m].basin.variance);
    EXPECT_EQ(a.members[m].basin.deviations, b.members[m].basin.deviations);
    EXPECT_EQ(a.members[m].sample_seeds, b.members[m].sample_seeds);
  }
  EXPECT_EQ(a.temperature, b.temperature);
  EXPECT_EQ(a.test_metrics, b.test_metrics);
  EXPECT_EQ(a.data_hash, b.data_hash);
}

TEST(BundleCodecTest, RoundTripKeepsEveryFieldAndPredictionsBitForBit) {
  for (Task task : {Task::kClassification, Task::kRegression}) {
    SyntheticBundleSpec spec;
    spec.task = task;
    const Bundle original = SyntheticBundle(spec);
    const std::string bytes = EncodeBundleFile(original);
    EXPECT_EQ(bytes, EncodeBundleFile(original)) << "encoding is deterministic";
    StatusOr<BundleFile> decoded = DecodeBundleFile(bytes, "b");
    ASSERT_TRUE(decoded.ok()) << decoded.status().ToString();
    ExpectSameBundle(original, decoded.value().bundle);
    EXPECT_EQ(decoded.value().payload_sha256,
              Sha256Hex(bytes.data() + kBundleHeaderBytes, decoded.value().payload_bytes));
    const Matrix x = testing::RandomInputs(1500, original.widths[0], 3);
    const Prediction before = Predictor::Create(original).value().Predict(x);
    const Prediction after = Predictor::Create(decoded.value().bundle).value().Predict(x);
    EXPECT_EQ(before.classification.probabilities, after.classification.probabilities);
    EXPECT_EQ(before.regression.mixture.mean, after.regression.mixture.mean);
    EXPECT_EQ(before.regression.mixture.stddev, after.regression.mixture.stddev);
  }
}

TEST(BundleCodecTest, FileLayoutIsTheDocumentedOne) {
  const std::string bytes = EncodeBundleFile(SyntheticBundle({}));
  EXPECT_EQ(bytes, Frame(PayloadOf(bytes)));
  bundle::Bundle message;
  ASSERT_TRUE(message.ParseFromString(PayloadOf(bytes)));
  EXPECT_EQ(message.task(), "classification");
}

TEST(BundleCodecTest, WriteThenReadTheFile) {
  const std::string dir = testing::MakeTempDir("chorus-bundle");
  const Bundle original = SyntheticBundle({});
  ASSERT_TRUE(WriteBundleFile(dir + "/b.chorus", original).ok());
  StatusOr<BundleFile> read = ReadBundleFile(dir + "/b.chorus");
  ASSERT_TRUE(read.ok()) << read.status().ToString();
  ExpectSameBundle(original, read.value().bundle);
  EXPECT_EQ(ReadBundleFile(dir + "/missing.chorus").status().code(), Status::Code::kInvalidInput);
  std::remove((dir + "/b.chorus").c_str());
  std::remove(dir.c_str());
}

TEST(BundleCodecTest, TruncatedFilesAreRefused) {
  const std::string bytes = EncodeBundleFile(SyntheticBundle({}));
  for (size_t keep :
       {size_t{0}, size_t{7}, size_t{20}, size_t{51}, bytes.size() / 2, bytes.size() - 1}) {
    const Status st = DecodeStatus(bytes.substr(0, keep));
    EXPECT_EQ(st.code(), Status::Code::kInvalidInput) << keep << ": " << st.ToString();
  }
  EXPECT_NE(DecodeStatus(bytes.substr(0, bytes.size() / 2)).message().find("truncated"),
            std::string::npos);
  EXPECT_NE(DecodeStatus(bytes + "x").message().find("trailing bytes"), std::string::npos);
}

TEST(BundleCodecTest, EverySingleFlippedByteIsRefused) {
  const std::string bytes = EncodeBundleFile(SyntheticBundle({}));
  for (size_t i = 0; i < bytes.size(); ++i) {
    std::string corrupt = bytes;
    corrupt[i] = static_cast<char>(corrupt[i] ^ 0x01);
    const Status st = DecodeStatus(corrupt);
    ASSERT_EQ(st.code(), Status::Code::kInvalidInput) << "byte " << i << ": " << st.ToString();
  }
  std::string corrupt = bytes;
  corrupt[kBundleHeaderBytes + 5] ^= 0x40;
  EXPECT_NE(DecodeStatus(corrupt).message().find("checksum mismatch"), std::string::npos);
  corrupt = bytes;
  corrupt[1] = 'X';
  EXPECT_NE(DecodeStatus(corrupt).message().find("bad magic"), std::string::npos);
}

TEST(BundleCodecTest, AnotherFormatVersionIsRefused) {
  const std::string bytes = EncodeBundleFile(SyntheticBundle({}));
  const Status st = DecodeStatus(Frame(PayloadOf(bytes), 2));
  EXPECT_EQ(st.code(), Status::Code::kInvalidInput);
  EXPECT_NE(st.message().find("bundle format version 2; this chorus reads version 1"),
            std::string::npos)
      << st.ToString();
}

// Each case makes a correctly framed and checksummed payload whose dimensions promise far more
// memory than exists (2^30 x 2^30 floats is 4 EiB). An attempt to allocate it would throw and
// come back as kInternal, so kInvalidInput shows the check came first.
TEST(BundleCodecTest, AbsurdDimensionsAreRefusedBeforeAllocating) {
  const std::string good = PayloadOf(EncodeBundleFile(SyntheticBundle({})));
  const std::vector<std::pair<const char*, std::function<void(bundle::Bundle&)>>> cases = {
      {"huge widths",
       [](bundle::Bundle& b) {
         b.set_widths(0, 1 << 30);
         b.set_widths(1, 1 << 30);
       }},
      {"many layers",
       [](bundle::Bundle& b) {
         for (int i = 0; i < 300; ++i) b.add_widths(8);
       }},
      {"huge deviations",
       [](bundle::Bundle& b) {
         auto* d = b.mutable_members(2)->mutable_basin()->mutable_deviations();
         d->set_rows(int64_t{1} << 40);
         d->set_cols(int64_t{1} << 40);
       }},
      {"too many samples",
       [](bundle::Bundle& b) {
         for (int i = 0; i < 20000; ++i) b.mutable_members(1)->add_sample_seeds(i);
       }},
      {"negative width", [](bundle::Bundle& b) { b.set_widths(1, -5); }},
      {"features mismatch",
       [](bundle::Bundle& b) { b.mutable_preprocessing()->add_feature_mean(0); }}};
  for (const auto& [name, mutate] : cases) {
    SCOPED_TRACE(name);
    const Status st = DecodeMutated(good, mutate);
    EXPECT_EQ(st.code(), Status::Code::kInvalidInput) << st.ToString();
  }
}

// A valid training summary for a synthetic classifier: every numeric column {1, 2, 2, 3}, every
// category and class an equal share.
TrainingSummary SummaryFor(const Bundle& b) {
  TrainingSummary s;
  s.rows = 4;
  for (const FeaturePlan::Column& c : b.preprocessing.plan.columns) {
    ColumnSummary column;
    column.name = c.name;
    column.categorical = c.categorical;
    if (c.categorical) {
      const size_t n = b.preprocessing.plan.categorical[c.index].vocabulary.size();
      column.category_shares.assign(n, 1.0 / static_cast<double>(n));
    } else {
      std::vector<double> values = {1, 2, 2, 3};
      column.numeric = SketchOf(&values);
    }
    s.columns.push_back(column);
  }
  s.class_shares.assign(b.class_names.size(), 1.0 / static_cast<double>(b.class_names.size()));
  return s;
}

TEST(BundleCodecTest, TrainingSummaryRoundTripsAndMalformedOnesAreRefused) {
  Bundle original = SyntheticBundle({});
  original.training_summary = SummaryFor(original);
  const std::string file = EncodeBundleFile(original);
  const StatusOr<BundleFile> read = DecodeBundleFile(file, "b");
  ASSERT_TRUE(read.ok()) << read.status().ToString();
  const TrainingSummary& got = read.value().bundle.training_summary;
  ASSERT_EQ(got.columns.size(), original.training_summary.columns.size());
  for (size_t k = 0; k < got.columns.size(); ++k) {
    EXPECT_EQ(got.columns[k].name, original.training_summary.columns[k].name);
    EXPECT_EQ(got.columns[k].numeric.values, original.training_summary.columns[k].numeric.values);
    EXPECT_EQ(got.columns[k].numeric.below, original.training_summary.columns[k].numeric.below);
    EXPECT_EQ(got.columns[k].category_shares, original.training_summary.columns[k].category_shares);
  }
  EXPECT_EQ(got.class_shares, original.training_summary.class_shares);
  // A bundle without a summary (as older chorus wrote them) still reads.
  EXPECT_TRUE(DecodeBundleFile(EncodeBundleFile(SyntheticBundle({})), "b").ok());

  const std::string good = PayloadOf(file);
  const std::vector<std::pair<const char*, std::function<void(bundle::Bundle&)>>> cases = {
      {"values out of order",
       [](bundle::Bundle& b) {
         b.mutable_training_summary()->mutable_columns(0)->mutable_numeric()->set_values(0, 9);
       }},
      {"last upto below 1",
       [](bundle::Bundle& b) {
         auto* n = b.mutable_training_summary()->mutable_columns(0)->mutable_numeric();
         n->set_upto(n->upto_size() - 1, 0.5f);
       }},
      {"a column missing",
       [](bundle::Bundle& b) { b.mutable_training_summary()->mutable_columns()->RemoveLast(); }},
      {"a column renamed",
       [](bundle::Bundle& b) { b.mutable_training_summary()->mutable_columns(0)->set_name("zz"); }},
      {"class shares not summing to 1",
       [](bundle::Bundle& b) { b.mutable_training_summary()->set_class_shares(0, 0.9); }},
      {"no rows", [](bundle::Bundle& b) { b.mutable_training_summary()->set_rows(0); }}};
  for (const auto& [name, mutate] : cases) {
    SCOPED_TRACE(name);
    const Status st = DecodeMutated(good, mutate);
    EXPECT_EQ(st.code(), Status::Code::kInvalidInput) << st.ToString();
    EXPECT_NE(st.message().find("b: training summary"), std::string::npos) << st.ToString();
  }
}

TEST(BundleCodecTest, PredictorRefusesSamplesBeyondItsMemoryBound) {
  const Bundle b = SyntheticBundle({});
  const StatusOr<Predictor> p = Predictor::Create(b, nullptr, /*max_sample_bytes=*/100);
  EXPECT_EQ(p.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(p.status().message().find("bytes allowed"), std::string::npos);
}

}  // namespace bundle_codec_test
}  // namespace chorus

namespace chorus {
namespace bundle_codec_test {

// A bundle with a last-layer Laplace member: the factors survive the round trip and give the same
// predictions; factors that do not describe exactly the last layer are refused with the place.
TEST(BundleCodecTest, LaplaceMembersRoundTripAndMismatchedFactorsAreRefused) {
  SyntheticBundleSpec spec;
  spec.basins = {BasinMethod::kLaplaceLastLayer, BasinMethod::kGaussianDiag};
  const Bundle original = SyntheticBundle(spec);
  StatusOr<BundleFile> decoded = DecodeBundleFile(EncodeBundleFile(original), "b");
  ASSERT_TRUE(decoded.ok()) << decoded.status().ToString();
  const LaplaceFactors& a = original.members[1].basin.laplace;
  const LaplaceFactors& b = decoded.value().bundle.members[1].basin.laplace;
  EXPECT_TRUE(a.eigenvectors == b.eigenvectors);
  EXPECT_EQ(a.eigenvalues, b.eigenvalues);
  EXPECT_EQ(a.prior_precision, b.prior_precision);
  const Matrix x = testing::RandomInputs(300, original.widths[0], 4);
  EXPECT_EQ(Predictor::Create(original).value().Predict(x).classification.probabilities,
            Predictor::Create(decoded.value().bundle).value().Predict(x).classification.probabilities);

  Bundle wrong = original;
  LaplaceFactors& f = wrong.members[1].basin.laplace;
  const int64_t smaller = f.eigenvectors.rows() - f.outputs;  // one hidden unit short
  f.eigenvectors = Matrix::Identity(smaller, smaller);
  f.eigenvalues.assign(static_cast<size_t>(smaller), 1.0f);
  const StatusOr<BundleFile> refused = DecodeBundleFile(EncodeBundleFile(wrong), "w.chorus");
  ASSERT_FALSE(refused.ok());
  EXPECT_NE(refused.status().message().find("w.chorus: member 1: laplace fit covers"), std::string::npos)
      << refused.status().ToString();
}

}  // namespace bundle_codec_test
}  // namespace chorus

// The encoder predict uses gives the floats training gave: rows of a CSV whose header is
// reordered, lacks the target and holds extra columns encode to LoadPreparedData's test rows.
#include "common/feature_encoder.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "common/csv_reader.h"
#include "common/dataset.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace feature_encoder_test {

class FeatureEncoderTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("chorus-feature-encoder"); }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  std::string Write(const std::string& name, const std::string& text) {
    const std::string path = dir_ + "/" + name;
    std::ofstream(path, std::ios::binary) << text;
    return path;
  }

  std::string dir_;
};

TEST_F(FeatureEncoderTest, PredictEncodingEqualsTrainingEncoding) {
  DataConfig config;
  config.train = Write("train.csv",
                       "a,site,b,y\n0.1,north,3,p\n0.7,south,1e3,q\n-2.5,north,7,p\n"
                       "4,east,0.25,q\n1.5,south,2,p\n");
  config.test = Write("test.csv", "a,site,b,y\n 0.3 ,west,+8,p\n1,north,-1,q\n");
  config.validation_file = Write("validation.csv", "a,site,b,y\n1,north,1,p\n");
  config.target = "y";
  config.categorical = {"site"};
  const StatusOr<PreparedData> data = LoadPreparedData(config, 1);
  ASSERT_TRUE(data.ok()) << data.status().ToString();
  // The same test rows, columns reordered, the target gone, an extra column added.
  const std::string path = Write("input.csv", "note,b,site,a\nz, +8 ,west,0.3\nz,-1,north,1\n");
  StatusOr<std::unique_ptr<CsvReader>> reader = CsvReader::Open(path);
  ASSERT_TRUE(reader.ok());
  const StatusOr<CsvRowEncoder> encoder = CsvRowEncoder::ForHeader(
      data.value().plan, data.value().standardizer, reader.value()->header(), path + ":1");
  ASSERT_TRUE(encoder.ok()) << encoder.status().ToString();
  ASSERT_EQ(encoder.value().Features(), data.value().features());
  CsvRecord record;
  for (Eigen::Index i = 0; i < 2; ++i) {
    ASSERT_TRUE(reader.value()->Next(&record).value());
    Matrix row(1, encoder.value().Features());
    ASSERT_TRUE(encoder.value()
                    .Encode(record.fields, path + ":" + std::to_string(record.line), row.data())
                    .ok());
    EXPECT_EQ(row.row(0), data.value().test.x.row(i)) << "row " << i;
  }
}

TEST_F(FeatureEncoderTest, MissingColumnsAndBadFieldsNameTheirPlace) {
  FeaturePlan plan;
  plan.columns = {{"a", false, 0}, {"b", false, 1}};
  const Standardizer s{{0, 0}, {1, 1}};
  const StatusOr<CsvRowEncoder> missing = CsvRowEncoder::ForHeader(plan, s, {"a", "c"}, "in:1");
  EXPECT_NE(missing.status().message().find("in:1: expected a feature column \"b\""),
            std::string::npos)
      << missing.status().ToString();
  const CsvRowEncoder encoder = CsvRowEncoder::ForHeader(plan, s, {"b", "a"}, "in:1").value();
  float out[2];
  const Status st = encoder.Encode({"nan", "1"}, "in:7", out);
  EXPECT_NE(st.message().find("in:7:1: expected a finite number in column \"b\""),
            std::string::npos)
      << st.ToString();
  EXPECT_NE(encoder.Encode({"1", "x"}, "in:8", out).message().find("in:8:2: expected a number"),
            std::string::npos);
}

// Found by the predict_input fuzz target (tests/fuzz/regressions/predict_input/): a finite double
// far from the training data standardised to float infinity and reached the networks.
TEST_F(FeatureEncoderTest, AValueThatStandardisesBeyondFloatRangeIsRefusedNamingTheFeature) {
  FeaturePlan plan;
  plan.columns = {{"a", false, 0}, {"b", false, 1}};
  const Standardizer s{{0.5f, 0.5f}, {2, 1e-6f}};
  const CsvRowEncoder encoder = CsvRowEncoder::ForHeader(plan, s, {"a", "b"}, "in:1").value();
  float out[2];
  EXPECT_TRUE(encoder.Encode({"3e38", "1e30"}, "in:2", out).ok()) << "3e38 / 2 and 1e36 are floats";
  const Status st = encoder.Encode({"1", "1e33"}, "in:3", out);
  EXPECT_EQ(st.code(), Status::Code::kInvalidInput);
  EXPECT_NE(st.message().find("in:3: feature \"b\" = 1e+33 standardises to"), std::string::npos)
      << st.message() << " (1e33 / 1e-6 = 1e39 overflows float)";
  EXPECT_NE(st.message().find("beyond float range"), std::string::npos) << st.message();
  EXPECT_NE(encoder.Encode({"1e300", "1"}, "in:4", out).message().find("in:4:1: expected a number within float range"),
            std::string::npos) << "past float range before any standardising";
}

}  // namespace feature_encoder_test
}  // namespace chorus

#include "common/dataset.h"

#include <gtest/gtest.h>
#include <zlib.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <functional>
#include <set>

#include "common/sha256.h"
#include "common/true_probabilities.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace dataset_test {

constexpr char kTrain[] = "a,b,y\n1,10,p\n2,20,q\n3,30,p\n4,40,q\n5,50,p\n6,60,q\n";
constexpr char kTest[] = "a,b,y\n1,1,p\n2,2,q\n";

std::string WriteFile(const std::string& path, const std::string& bytes) {
  std::ofstream(path, std::ios::binary) << bytes;
  return path;
}

std::string WriteGzip(const std::string& path, const std::string& bytes) {
  gzFile file = gzopen(path.c_str(), "wb");
  EXPECT_NE(file, nullptr);
  gzwrite(file, bytes.data(), static_cast<unsigned>(bytes.size()));
  gzclose(file);
  return path;
}

// IDX bytes: magic 0x0000TTDD, big-endian uint32 sizes, then `elements` as given.
std::string Idx(uint8_t type, const std::vector<uint32_t>& dims, const std::string& elements) {
  std::string bytes = {0, 0, static_cast<char>(type), static_cast<char>(dims.size())};
  for (uint32_t d : dims) {
    for (int shift = 24; shift >= 0; shift -= 8) bytes += static_cast<char>((d >> shift) & 0xFF);
  }
  return bytes + elements;
}

std::string Bytes(const std::vector<int>& values) {
  return std::string(values.begin(), values.end());
}

// Six 2x2 ubyte images labelled 10, 2, 0, 2, 10, 0.
std::string TrainImages() { return Idx(0x08, {6, 2, 2}, Bytes(std::vector<int>(24, 3))); }
std::string TrainLabels() { return Idx(0x08, {6}, Bytes({10, 2, 0, 2, 10, 0})); }

DataConfig CsvConfig(const std::string& dir) {
  DataConfig c;
  c.format = "csv";
  c.train = dir + "/train.csv";
  c.test = dir + "/test.csv";
  c.target = "y";
  c.validation_fraction = 0.2;
  c.folds = 0;  // a holdout, as a config naming a fraction gets
  return c;
}

DataConfig WriteCsv(const std::string& dir, const std::string& train, const std::string& test) {
  const DataConfig c = CsvConfig(dir);
  WriteFile(c.train, train);
  WriteFile(c.test, test);
  return c;
}

DataConfig IdxConfig(const std::string& dir) {
  DataConfig c;
  c.format = "idx";
  c.train_idx = {dir + "/train-images.idx", dir + "/train-labels.idx"};
  c.test_idx = {dir + "/test-images.idx", dir + "/test-labels.idx"};
  c.validation_fraction = 0.2;
  c.folds = 0;  // a holdout, as a config naming a fraction gets
  return c;
}

DataConfig WriteIdx(const std::string& dir, const std::string& train_images,
                    const std::string& train_labels) {
  const DataConfig c = IdxConfig(dir);
  WriteFile(c.train_idx.images, train_images);
  WriteFile(c.train_idx.labels, train_labels);
  WriteFile(c.test_idx.images, Idx(0x08, {2, 2, 2}, Bytes(std::vector<int>(8, 1))));
  WriteFile(c.test_idx.labels, Idx(0x08, {2}, Bytes({0, 2})));
  return c;
}

class DatasetTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("dataset_test"); }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  PreparedData LoadOk(const DataConfig& config, uint64_t seed = 7) {
    StatusOr<PreparedData> data = LoadPreparedData(config, seed);
    EXPECT_TRUE(data.ok()) << data.status().ToString();
    return data.ok() ? data.value() : PreparedData();
  }

  std::string dir_;
};

// One bad input: writes its files under a directory and returns the config that reads them; the
// message must contain each expected piece (file, line, column, what was expected).
struct BadInput {
  std::string name;
  std::function<DataConfig(const std::string& dir)> write;
  std::vector<std::string> expected;
};

std::vector<BadInput> CsvBadInputs() {
  return {
      {"empty file",
       [](const std::string& d) { return WriteCsv(d, "", kTest); },
       {"train.csv: file is empty"}},
      {"ragged row",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n3,4\n", kTest); },
       {"train.csv:3:3: expected 3 fields, found 2"}},
      {"non-numeric value",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n3,abc,q\n", kTest); },
       {"train.csv:3:2: expected a number in column \"b\", found \"abc\""}},
      {"empty numeric cell",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n3,,q\n", kTest); },
       {"train.csv:3:2: expected a number in column \"b\", found \"\""}},
      {"test value beyond float range once standardised",  // column a's training scale is ~5e-7
       [](const std::string& d) {
         return WriteCsv(d, "a,b,y\n1,2,p\n1.000001,2,q\n1,2,p\n", "a,b,y\n1e38,2,p\n");
       },
       {"test.csv:2: feature \"a\" = 1e+38 standardises to", "beyond float range"}},
      {"value past float range",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n3,1e39,q\n", kTest); },
       {"train.csv:3:2: expected a number within float range"}},
      {"non-numeric regression target",
       [](const std::string& d) {
         DataConfig c = WriteCsv(d, "a,y\n1,2.5\n2,high\n3,4\n", "a,y\n1,2\n");
         c.task = Task::kRegression;
         return c;
       },
       {"train.csv:3:2: expected a number in column \"y\", found \"high\""}},
      {"NaN",
       [](const std::string& d) { return WriteCsv(d, kTrain, "a,b,y\n1,nan,p\n"); },
       {"test.csv:2:2: expected a finite number in column \"b\", found \"nan\""}},
      {"inf",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n-inf,3,q\n", kTest); },
       {"train.csv:3:1: expected a finite number in column \"a\", found \"-inf\""}},
      {"overflowing number",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n1e999,3,q\n", kTest); },
       {"train.csv:3:1: expected a finite number in column \"a\", found \"1e999\""}},
      {"missing target column",
       [](const std::string& d) { return WriteCsv(d, "a,b\n1,2\n", kTest); },
       {"train.csv:1: expected a target column \"y\" in the header, found a, b"}},
      {"missing feature column in test",
       [](const std::string& d) { return WriteCsv(d, kTrain, "a,y\n1,p\n"); },
       {"test.csv:1: expected a feature column \"b\""}},
      {"missing categorical column",
       [](const std::string& d) {
         DataConfig c = WriteCsv(d, kTrain, kTest);
         c.categorical = {"site"};
         return c;
       },
       {"train.csv:1: expected a categorical column \"site\" in the header, found a, b, y"}},
      {"categorical target",
       [](const std::string& d) {
         DataConfig c = WriteCsv(d, kTrain, kTest);
         c.categorical = {"y"};
         return c;
       },
       {"data.categorical: \"y\" is the target column"}},
      {"no feature columns",
       [](const std::string& d) { return WriteCsv(d, "y\np\nq\np\nq\n", "y\np\n"); },
       {"train.csv:1: expected feature columns besides the target \"y\", found none"}},
      {"one class in train",
       [](const std::string& d) {
         return WriteCsv(d, "a,y\n1,p\n2,p\n3,p\n4,p\n5,p\n", "a,y\n1,p\n");
       },
       {"train.csv: expected at least 2 classes in the training rows, found 1 (p)"}},
      // One row: the holdout takes at least one row (fraction 0.2 of 1 rounds up to 1), which
      // would leave none to train on.
      {"too few rows for the holdout",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n", kTest); },
       {"train.csv: expected enough rows to hold out validation fraction 0.2 and keep some, "
        "found 1 row"}},
      {"more folds than rows",
       [](const std::string& d) {
         DataConfig c = WriteCsv(d, "a,b,y\n1,2,p\n3,4,q\n", kTest);
         c.folds = 5;
         return c;
       },
       {"train.csv: expected at least 5 rows for data.validation.folds = 5, found 2"}},
      {"test label never seen in train",
       [](const std::string& d) { return WriteCsv(d, kTrain, "a,b,y\n1,2,p\n3,4,r\n"); },
       {"test.csv:3:3: label \"r\" never appears in the training rows"}},
      {"empty class label",
       [](const std::string& d) { return WriteCsv(d, "a,b,y\n1,2,p\n3,4,\n", kTest); },
       {"train.csv:3:3: expected a class label in column \"y\", found an empty field"}},
      {"missing file",
       [](const std::string& d) {
         DataConfig c = CsvConfig(d);
         WriteFile(c.train, kTrain);
         return c;
       },
       {"test.csv: cannot open file"}},
  };
}

std::vector<BadInput> IdxBadInputs() {
  return {
      {"IDX header promises more than the file holds",
       [](const std::string& d) {
         return WriteIdx(d, Idx(0x08, {6, 2, 2}, Bytes(std::vector<int>(10, 1))), TrainLabels());
       },
       {"train-images.idx: truncated: the header promises 24 elements (dims 6x2x2)"}},
      {"IDX images and labels counts differ",
       [](const std::string& d) {
         return WriteIdx(d, TrainImages(), Idx(0x08, {5}, Bytes({0, 1, 0, 1, 0})));
       },
       {"train-images.idx: holds 6 rows but ", "train-labels.idx holds 5 labels"}},
      {"IDX labels file that is not 1-D",
       [](const std::string& d) {
         return WriteIdx(d, TrainImages(), Idx(0x08, {6, 1}, Bytes({10, 2, 0, 2, 10, 0})));
       },
       {"train-labels.idx: expected a 1-dimensional labels file, found 2 dimensions"}},
      {"IDX test images narrower than train",
       [](const std::string& d) {
         const DataConfig c = WriteIdx(d, TrainImages(), TrainLabels());
         WriteFile(c.test_idx.images, Idx(0x08, {2, 3}, Bytes(std::vector<int>(6, 1))));
         return c;
       },
       {"test-images.idx: expected 4 values per row like the training images, found 3"}},
      {"IDX label that is not an integer",
       [](const std::string& d) {
         return WriteIdx(d, TrainImages(),
                         Idx(0x0D, {6}, Bytes({0x3F, 0xC0, 0, 0}) + std::string(20, '\0')));
       },
       {"train-labels.idx[0]: expected an integer class label, found 1.5"}},
      {"IDX image holding NaN",
       [](const std::string& d) {
         return WriteIdx(d, Idx(0x0D, {2, 2}, std::string(12, '\0') + Bytes({0x7F, 0xC0, 0, 0})),
                         Idx(0x08, {2}, Bytes({0, 1})));
       },
       {"train-images.idx[1]: expected finite values, found nan at element 1"}},
      {"IDX test label never seen in train",
       [](const std::string& d) {
         const DataConfig c = WriteIdx(d, TrainImages(), TrainLabels());
         WriteFile(c.test_idx.labels, Idx(0x08, {2}, Bytes({0, 9})));
         return c;
       },
       {"test-labels.idx[1]: label \"9\" never appears in the training rows"}},
      {"gzip IDX cut short",
       [](const std::string& d) {
         DataConfig c = WriteIdx(d, TrainImages(), TrainLabels());
         c.train_idx.images = WriteGzip(d + "/full.idx.gz", TrainImages());
         std::ifstream in(c.train_idx.images, std::ios::binary);
         const std::string gz((std::istreambuf_iterator<char>(in)),
                              std::istreambuf_iterator<char>());
         c.train_idx.images = WriteFile(d + "/train-images.idx.gz", gz.substr(0, gz.size() - 12));
         return c;
       },
       {"train-images.idx.gz: bad gzip data"}},
      {"gzip magic followed by garbage",
       [](const std::string& d) {
         DataConfig c = WriteIdx(d, TrainImages(), TrainLabels());
         c.train_idx.images = WriteFile(d + "/train-images.idx.gz",
                                        Bytes({0x1f, 0x8b}) + std::string(40, 'z'));
         return c;
       },
       {"train-images.idx.gz: bad gzip data"}},
  };
}

TEST_F(DatasetTest, BadInputIsRejectedWithItsPlace) {
  std::vector<BadInput> cases = CsvBadInputs();
  for (BadInput& c : IdxBadInputs()) cases.push_back(std::move(c));
  for (const BadInput& c : cases) {
    SCOPED_TRACE(c.name);
    const std::string dir = testing::MakeTempDir("dataset_bad");
    StatusOr<PreparedData> data = LoadPreparedData(c.write(dir), 7);
    EXPECT_EQ(data.status().code(), Status::Code::kInvalidInput);
    for (const std::string& piece : c.expected) {
      EXPECT_NE(data.status().message().find(piece), std::string::npos)
          << "message: " << data.status().message() << "\nexpected to contain: " << piece;
    }
    std::filesystem::remove_all(dir);
  }
}

// Rows "i,(i*i)%7,label" for i = 1..n; the label alternates p, q.
std::string NumberedCsv(int n, int shift) {
  std::string text = "a,b,y\n";
  for (int i = 1; i <= n; ++i) {
    text += std::to_string(i + shift) + "," + std::to_string((i * i) % 7) + "," +
            (i % 2 ? "p" : "q") + "\n";
  }
  return text;
}

std::set<std::string> Origins(const Split& split) {
  return std::set<std::string>(split.origin.begin(), split.origin.end());
}

TEST_F(DatasetTest, ValidationSplitIsSeededDisjointAndInFileOrder) {
  const DataConfig config = WriteCsv(dir_, NumberedCsv(50, 0), kTest);
  const PreparedData first = LoadOk(config, 7);
  const PreparedData again = LoadOk(config, 7);
  const PreparedData other = LoadOk(config, 8);
  EXPECT_EQ(first.validation.origin, again.validation.origin);
  EXPECT_EQ(first.hash, again.hash);
  EXPECT_NE(first.validation.origin, other.validation.origin);
  EXPECT_EQ(first.validation.rows(), 10);  // round(0.2 * 50)
  EXPECT_EQ(first.train.rows(), 40);
  std::set<std::string> all = Origins(first.train);
  for (const std::string& origin : first.validation.origin) {
    EXPECT_TRUE(all.insert(origin).second) << origin << " is in both train and validation";
  }
  EXPECT_EQ(all.size(), 50u);
  for (const Split* split : {&first.train, &first.validation}) {
    for (size_t i = 1; i < split->origin.size(); ++i) {
      const auto line = [](const std::string& o) { return std::stoi(o.substr(o.rfind(':') + 1)); };
      EXPECT_LT(line(split->origin[i - 1]), line(split->origin[i]));
    }
  }
}

TEST_F(DatasetTest, StandardizerUsesTrainStatisticsOnly) {
  // Test rows sit 1000 above the train rows, so their standardised mean is far from 0.
  const PreparedData data = LoadOk(WriteCsv(dir_, NumberedCsv(40, 0), NumberedCsv(10, 1000)));
  ASSERT_EQ(data.feature_names, (std::vector<std::string>{"a", "b"}));
  for (int j = 0; j < 2; ++j) {
    const Eigen::ArrayXf column = data.train.x.col(j).array();
    const float mean = column.mean();
    EXPECT_NEAR(mean, 0.0f, 1e-5f);
    EXPECT_NEAR(std::sqrt((column - mean).square().mean()), 1.0f, 1e-5f);
  }
  EXPECT_GT(data.test.x.col(0).mean(), 10.0f);
  // The mean of column a is over the train rows alone, not the held-out validation rows.
  double sum = 0;
  for (const std::string& o : data.train.origin) sum += std::stoi(o.substr(o.rfind(':') + 1)) - 1;
  EXPECT_NEAR(data.standardizer.mean[0], sum / data.train.rows(), 1e-4);
}

// A class with one row lands in validation for some seeds; the message then says so, instead of
// calling the label unseen.
TEST_F(DatasetTest, AClassWhoseRowsAllFallIntoTheHoldoutIsNamed) {
  std::string train = "a,b,y\n";
  for (int i = 0; i < 19; ++i) train += std::to_string(i) + "," + std::to_string(i % 3) + (i % 2 ? ",p\n" : ",q\n");
  train += "50,1,r\n";
  const DataConfig config = WriteCsv(dir_, train, kTest);
  int held_out = 0, trained = 0;
  for (uint64_t seed = 1; seed <= 30; ++seed) {
    const StatusOr<PreparedData> data = LoadPreparedData(config, seed);
    if (data.ok()) {
      EXPECT_EQ(data.value().class_names, (std::vector<std::string>{"p", "q", "r"}));
      ++trained;
    } else {
      EXPECT_EQ(data.status().message(), config.train + ": every row of class \"r\" fell into the validation "
                "holdout (data.validation.fraction 0.2), so no training row has it; cross-fit instead "
                "(data.validation.folds, stratified by class) or add rows of this class");
      ++held_out;
    }
  }
  EXPECT_GT(held_out, 0);
  EXPECT_GT(trained, 0);
}

TEST_F(DatasetTest, ConstantColumnGetsScaleOne) {
  const PreparedData data =
      LoadOk(WriteCsv(dir_, "a,b,y\n1,5,p\n2,5,q\n3,5,p\n4,5,q\n5,5,p\n", kTest));
  EXPECT_EQ(data.standardizer.scale[1], 1.0f);
  EXPECT_EQ(data.train.x(0, 1), 0.0f);
}

TEST_F(DatasetTest, OneHotVocabularyComesFromTrainRowsOnly) {
  DataConfig config = WriteCsv(dir_, "a,site,y\n1,south,p\n2,north,q\n3,south,p\n4,north,q\n",
                               "a,site,y\n1,west,p\n2,north,q\n");
  config.validation_file = WriteFile(dir_ + "/validation.csv", "site,a,y\neast,1,p\n");
  config.categorical = {"site"};
  const PreparedData data = LoadOk(config);
  ASSERT_EQ(data.plan.categorical.size(), 1u);
  EXPECT_EQ(data.plan.categorical[0].vocabulary, (std::vector<std::string>{"north", "south"}));
  EXPECT_EQ(data.feature_names, (std::vector<std::string>{"a", "site=north", "site=south"}));
  EXPECT_EQ(data.train.rows(), 4);  // a validation file leaves train whole
  EXPECT_EQ(data.validation.origin, (std::vector<std::string>{config.validation_file + ":2"}));
  // Unknown values ("west", "east") encode as all zeros before standardisation.
  for (const Split* split : {&data.test, &data.validation}) {
    for (int j = 1; j <= 2; ++j) {
      EXPECT_FLOAT_EQ(split->x(0, j), -data.standardizer.mean[j] / data.standardizer.scale[j]);
    }
  }
  EXPECT_FLOAT_EQ(data.test.x(1, 1), (1 - data.standardizer.mean[1]) / data.standardizer.scale[1]);
}

TEST_F(DatasetTest, ClassNamesSortNumericallyOnlyWhenAllAreIntegers) {
  DataConfig config = WriteCsv(dir_, "a,y\n1,10\n2,9\n3,2\n4,10\n", "a,y\n1,9\n");
  config.validation_file = WriteFile(dir_ + "/validation.csv", "a,y\n1,2\n");
  const PreparedData numeric = LoadOk(config);
  EXPECT_EQ(numeric.class_names, (std::vector<std::string>{"2", "9", "10"}));
  EXPECT_EQ(numeric.train.labels, (std::vector<int32_t>{2, 1, 0, 2}));
  EXPECT_EQ(numeric.test.labels, (std::vector<int32_t>{1}));

  WriteFile(config.train, "a,y\n1,10\n2,b\n3,a\n");
  WriteFile(config.test, "a,y\n1,a\n");
  WriteFile(config.validation_file, "a,y\n1,b\n");
  EXPECT_EQ(LoadOk(config).class_names, (std::vector<std::string>{"10", "a", "b"}));
}

TEST_F(DatasetTest, RegressionTargetIsStandardisedWithTrainStatistics) {
  DataConfig config = WriteCsv(dir_, "a,y\n1,2\n2,4\n3,6\n4,8\n", "a,y\n5,10\n");
  config.task = Task::kRegression;
  config.validation_file = WriteFile(dir_ + "/validation.csv", "a,y\n9,100\n");
  const PreparedData data = LoadOk(config);
  EXPECT_TRUE(data.class_names.empty());
  EXPECT_FLOAT_EQ(data.target_mean, 5.0f);
  EXPECT_FLOAT_EQ(data.target_scale, std::sqrt(5.0f));  // population std of 2, 4, 6, 8
  EXPECT_FLOAT_EQ(data.train.targets[0], -3.0f / std::sqrt(5.0f));
  EXPECT_FLOAT_EQ(data.test.targets[0], 5.0f / std::sqrt(5.0f));
  EXPECT_TRUE(data.train.labels.empty());
}

TEST_F(DatasetTest, MaxRowsKeepTheFirstRowsOfEachFile) {
  DataConfig config = WriteCsv(dir_, NumberedCsv(20, 0), NumberedCsv(5, 0));
  config.max_train_rows = 10;
  config.max_test_rows = 3;
  const PreparedData data = LoadOk(config);
  EXPECT_EQ(data.train.rows() + data.validation.rows(), 10);
  EXPECT_EQ(data.validation.rows(), 2);
  EXPECT_EQ(data.test.origin.back(), config.test + ":4");
  std::set<std::string> seen = Origins(data.train);
  seen.insert(data.validation.origin.begin(), data.validation.origin.end());
  EXPECT_EQ(*seen.rbegin(), config.train + ":9");  // lines 2..11; as text, ":9" sorts last
  EXPECT_EQ(seen.count(config.train + ":12"), 0u);
}

TEST_F(DatasetTest, IdxLabelsMapToNumericallySortedClassNames) {
  DataConfig config = WriteIdx(dir_, TrainImages(), TrainLabels());
  config.validation_idx = {
      WriteFile(dir_ + "/val-images.idx", Idx(0x08, {1, 4}, Bytes({1, 2, 3, 4}))),
      WriteFile(dir_ + "/val-labels.idx", Idx(0x08, {1}, Bytes({2})))};
  const PreparedData data = LoadOk(config);
  EXPECT_EQ(data.class_names, (std::vector<std::string>{"0", "2", "10"}));
  EXPECT_EQ(data.train.labels, (std::vector<int32_t>{2, 1, 0, 1, 2, 0}));
  EXPECT_EQ(data.test.labels, (std::vector<int32_t>{0, 1}));
  EXPECT_EQ(data.features(), 4);
  EXPECT_EQ(data.feature_names.front(), "x0");
  EXPECT_EQ(data.train.origin[5], config.train_idx.images + "[5]");
  EXPECT_EQ(data.validation.origin[0], config.validation_idx.images + "[0]");
}

TEST_F(DatasetTest, GzipIdxLoadsLikePlainIdx) {
  const DataConfig plain = WriteIdx(dir_, TrainImages(), TrainLabels());
  DataConfig gzip = plain;
  gzip.train_idx = {WriteGzip(dir_ + "/train-images.idx.gz", TrainImages()),
                    WriteGzip(dir_ + "/train-labels.idx.gz", TrainLabels())};
  const PreparedData a = LoadOk(plain);
  const PreparedData b = LoadOk(gzip);
  EXPECT_EQ(a.hash, b.hash);
  EXPECT_EQ(b.train.origin[0], gzip.train_idx.images + "[0]");
}

TEST_F(DatasetTest, IdxRegressionReadsTargetsFromTheLabelsFile) {
  DataConfig config = WriteIdx(dir_, TrainImages(), TrainLabels());
  config.task = Task::kRegression;
  const PreparedData data = LoadOk(config);
  EXPECT_TRUE(data.class_names.empty());
  EXPECT_EQ(data.train.targets.size() + data.validation.targets.size(), 6u);
  EXPECT_GT(data.target_scale, 1.0f);
}

TEST_F(DatasetTest, HashIsStableAndFollowsTheData) {
  const DataConfig config = WriteCsv(dir_, kTrain, kTest);
  const PreparedData a = LoadOk(config);
  EXPECT_EQ(a.hash.size(), 64u);
  EXPECT_EQ(a.hash, LoadOk(config).hash);
  WriteFile(config.test, "a,b,y\n1,1,p\n2,3,q\n");
  EXPECT_NE(a.hash, LoadOk(config).hash);
}

// Known answers from FIPS 180-2, appendix B.1, and the digest of the empty message.
TEST_F(DatasetTest, HashingUsesStandardSha256) {
  EXPECT_EQ(Sha256Hex("abc", 3),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(Sha256Hex("", 0), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  Sha256 incremental;
  incremental.Update("a", 1);
  incremental.Update("bc", 2);
  EXPECT_EQ(incremental.FinishHex(), Sha256Hex("abc", 3));
}

TEST_F(DatasetTest, TrueProbabilitiesAreReorderedToClassNames) {
  const PreparedData data = LoadOk(WriteCsv(dir_, kTrain, kTest));
  ASSERT_EQ(data.class_names, (std::vector<std::string>{"p", "q"}));
  const std::string path = WriteFile(dir_ + "/true.csv", "q,p\n0.25,0.75\n1,0\n");
  StatusOr<Matrix> p = LoadTrueProbabilities(path, data);
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  EXPECT_EQ(p.value()(0, 0), 0.75f);
  EXPECT_EQ(p.value()(0, 1), 0.25f);
  EXPECT_EQ(p.value()(1, 1), 1.0f);

  WriteFile(path, "q,p\n0.25,0.75\n");
  EXPECT_NE(LoadTrueProbabilities(path, data).status().message().find("expected 2 rows"),
            std::string::npos);
  WriteFile(path, "q,r\n0.25,0.75\n1,0\n");
  EXPECT_NE(LoadTrueProbabilities(path, data)
                .status()
                .message()
                .find(path + ":1: expected a class column \"p\""),
            std::string::npos);
  WriteFile(path, "q,p\n0.25,0.75\n1.5,0\n");
  EXPECT_NE(LoadTrueProbabilities(path, data)
                .status()
                .message()
                .find(path + ":3:1: expected a probability in [0, 1]"),
            std::string::npos);
}

}  // namespace dataset_test
}  // namespace chorus

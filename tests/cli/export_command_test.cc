// `chorus export BUNDLE --onnx FILE` (coordinator/export_command.h). Each exported model is
// checked outside chorus by tests/reference/onnx_evaluate.py: Debian python3-onnx's
// onnx.checker.check_model(full_check=True), then a NumPy interpreter of the graph's operators
// (written to the ONNX operator specifications, no ONNX runtime), whose outputs must equal
// `chorus predict`'s on every input row within kTolerance. Bundles: synthetic ones (basin
// samples of every kind, categorical one-hot features, convolution stages, GELU) and the two
// trained demo runs the promote tests share.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "common/rng.h"
#include "proto/bundle_codec.h"
#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace export_command_test {

namespace fs = std::filesystem;

// |onnx - predict| <= kTolerance * max(1, |predict|): absolute for probabilities, relative for
// regression values in target units (the networks run in float32 in both).
constexpr double kTolerance = 1e-5;

testing::CommandResult Chorus(const std::string& args) {
  return testing::RunShell(testing::BinaryPath("chorus") + " " + args, 300);
}

// The named columns of a CSV file without quoted fields, as numbers.
std::map<std::string, std::vector<double>> ReadColumns(const std::string& path) {
  std::istringstream lines(testing::ReadTextFile(path));
  std::string line, field;
  std::getline(lines, line);
  std::vector<std::string> header;
  for (std::istringstream f(line); std::getline(f, field, ',');) header.push_back(field);
  std::map<std::string, std::vector<double>> columns;
  while (std::getline(lines, line)) {
    std::istringstream f(line);
    for (size_t j = 0; j < header.size() && std::getline(f, field, ','); ++j) {
      const std::string& name = header[j];
      if (name.rfind("p_", 0) == 0 || name == "mean" || name == "total_std") {
        columns[name].push_back(std::stod(field));
      }
    }
  }
  return columns;
}

class ExportCommandTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("chorus-export"); }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  std::string WriteBundle(const std::string& name, const Bundle& b) {
    const std::string path = dir_ + "/" + name + ".chorus";
    EXPECT_TRUE(WriteBundleFile(path, b).ok());
    return path;
  }

  // `rows` CSV rows for a synthetic bundle's columns x0.. and site (with a value outside its
  // vocabulary, which encodes as all zeros), columns in reverse order.
  std::string WriteInputs(const Bundle& b, int rows, uint64_t seed) {
    Philox rng(seed);
    const std::vector<FeaturePlan::Column>& columns = b.preprocessing.plan.columns;
    const char* sites[] = {"east", "north", "west", "south"};
    std::string text;
    for (auto c = columns.rbegin(); c != columns.rend(); ++c) text += (c == columns.rbegin() ? "" : ",") + c->name;
    text += "\n";
    for (int i = 0; i < rows; ++i) {
      for (auto c = columns.rbegin(); c != columns.rend(); ++c) {
        if (c != columns.rbegin()) text += ",";
        text += c->categorical ? std::string(sites[rng.NextBelow(4)]) : std::to_string(2.0 * rng.NextNormal());
      }
      text += "\n";
    }
    const std::string path = dir_ + "/inputs.csv";
    testing::WriteTextFile(path, text);
    return path;
  }

  // Exports and predicts, evaluates the export with the reference script, and returns the
  // largest |difference| from `chorus predict` over every row and output (-1 on failure).
  double ExportAndCompare(const std::string& bundle, const std::string& inputs, const Bundle& b) {
    const std::string onnx = dir_ + "/model.onnx", predictions = dir_ + "/predictions.csv";
    const testing::CommandResult exported = Chorus("export " + bundle + " --onnx " + onnx);
    EXPECT_EQ(exported.exit_code, 0) << exported.output;
    const testing::CommandResult predicted = Chorus("predict " + bundle + " " + inputs + " -o " + predictions);
    EXPECT_EQ(predicted.exit_code, 0) << predicted.output;
    if (exported.exit_code != 0 || predicted.exit_code != 0) return -1;
    const auto reference = testing::ParseReferenceOutput(
        testing::RunReferenceScript("onnx_evaluate.py", {onnx, inputs}));
    const auto chorus = ReadColumns(predictions);
    if (reference.count("rows") == 0) return -1;
    const size_t rows = static_cast<size_t>(reference.at("rows")[0]);
    EXPECT_GT(rows, 0u);
    EXPECT_GT(reference.at("nodes")[0], 0);
    double worst = 0, worst_relative = 0, lowest = HUGE_VAL, highest = -HUGE_VAL;
    const auto compare = [&](const std::string& what, double onnx_value, double predict_value) {
      const double diff = std::abs(onnx_value - predict_value);
      const double relative = diff / std::max(1.0, std::abs(predict_value));
      EXPECT_LE(relative, kTolerance) << what << ": onnx " << onnx_value << ", predict " << predict_value;
      worst = std::max(worst, diff);
      worst_relative = std::max(worst_relative, relative);
      lowest = std::min(lowest, predict_value);
      highest = std::max(highest, predict_value);
    };
    if (b.task == Task::kClassification) {
      const std::vector<double>& p = reference.at("probabilities");
      const size_t k = b.class_names.size();
      EXPECT_EQ(p.size(), rows * k);
      for (size_t c = 0; c < k; ++c) {
        const std::vector<double>& column = chorus.at("p_" + b.class_names[c]);
        EXPECT_EQ(column.size(), rows);
        for (size_t i = 0; i < std::min(rows, column.size()) && i * k + c < p.size(); ++i) {
          compare("row " + std::to_string(i) + " p_" + b.class_names[c], p[i * k + c], column[i]);
        }
      }
    } else {
      const std::vector<double>&mean = reference.at("mean"), &variance = reference.at("variance");
      const std::vector<double>&m = chorus.at("mean"), &sd = chorus.at("total_std");
      EXPECT_EQ(mean.size(), rows);
      EXPECT_EQ(m.size(), rows);
      for (size_t i = 0; i < std::min({rows, mean.size(), variance.size(), m.size(), sd.size()}); ++i) {
        compare("row " + std::to_string(i) + " mean", mean[i], m[i]);
        compare("row " + std::to_string(i) + " variance", variance[i], sd[i] * sd[i]);
      }
    }
    // Outputs that hardly vary between rows would let a graph that ignores its input pass.
    EXPECT_GT(highest - lowest, 0.05) << "outputs from " << lowest << " to " << highest;
    std::printf("%zu rows, outputs in [%.3g, %.3g]: max |onnx - predict| %.3g, relative %.3g\n", rows,
                lowest, highest, worst, worst_relative);
    return worst;
  }

  std::string dir_;
};

TEST_F(ExportCommandTest, ClassificationWithEveryBasinKindMatchesPredict) {
  testing::SyntheticBundleSpec spec;
  spec.basins = {BasinMethod::kGaussianDiag, BasinMethod::kGaussianLowRank,
                 BasinMethod::kLaplaceLastLayer};
  const Bundle b = testing::SyntheticBundle(spec);
  EXPECT_GE(ExportAndCompare(WriteBundle("classes", b), WriteInputs(b, 300, 1), b), 0);
}

TEST_F(ExportCommandTest, RegressionMeanAndVarianceMatchPredict) {
  testing::SyntheticBundleSpec spec;
  spec.task = Task::kRegression;
  spec.hidden = {5, 4};
  spec.activation = Activation::kTanh;
  const Bundle b = testing::SyntheticBundle(spec);
  EXPECT_GE(ExportAndCompare(WriteBundle("regression", b), WriteInputs(b, 300, 2), b), 0);
}

// Two stages (max then average pooling, an odd image width whose last column the first pooling drops)
// and GELU, the activation ONNX opset 13 builds from Erf.
TEST_F(ExportCommandTest, ConvolutionStagesWithGeluMatchPredict) {
  testing::SyntheticBundleSpec spec;
  spec.image = {2, 8, 9};
  spec.conv = {{3, 3, Pooling::kMax}, {4, 1, Pooling::kAverage}};
  spec.numeric_columns = static_cast<int>(spec.image.size());
  spec.categorical_column = false;
  spec.activation = Activation::kGelu;
  const Bundle b = testing::SyntheticBundle(spec);
  EXPECT_GE(ExportAndCompare(WriteBundle("conv", b), WriteInputs(b, 200, 3), b), 0);
}

// Trained bundles on the demo data (its test file, its categorical station column): the two
// runs the promote tests share, and one whose members carry low-rank basin fits (GELU).
TEST_F(ExportCommandTest, TrainedDemoBundlesMatchPredictOnTheirTestRows) {
  const char* kBasin =
      "train: {epochs: 3, batch_size: 50}\ncluster: {local_workers: 0}\n"
      "ensemble: {members: 2, basin: {method: gaussian_lowrank, epochs: 1, snapshots: 4, rank: 3, samples: 3}}\n";
  std::string basin_yaml = testing::DemoClassificationYaml("lowrank", 3, kBasin);
  basin_yaml.replace(basin_yaml.find("model: {hidden: [16]}"), 21, "model: {hidden: [16], activation: gelu}");
  const std::string runs[] = {
      testing::SharedPromoteRun(testing::PromoteRun::kBetter),
      testing::SharedPromoteRun(testing::PromoteRun::kBetterRegression),
      testing::SharedDemoRun("export-lowrank", basin_yaml)};
  const std::string tests[] = {"alarms_test.csv", "faults_test.csv", "alarms_test.csv"};
  for (int i = 0; i < 3; ++i) {
    ASSERT_FALSE(runs[i].empty());
    const std::string bundle = runs[i] + "/bundle.chorus";
    const StatusOr<BundleFile> file = ReadBundleFile(bundle);
    ASSERT_TRUE(file.ok()) << file.status().ToString();
    const std::string data = fs::path(runs[i]).parent_path().parent_path().string() + "/data/";
    EXPECT_GE(ExportAndCompare(bundle, data + tests[i], file.value().bundle), 0);
  }
}

TEST_F(ExportCommandTest, MetadataNamesTheBundle) {
  const Bundle b = testing::SyntheticBundle({});
  const std::string bundle = WriteBundle("meta", b), onnx = dir_ + "/meta.onnx";
  ASSERT_EQ(Chorus("export " + bundle + " --onnx " + onnx).exit_code, 0);
  const std::string bytes = testing::ReadTextFile(onnx);
  const std::string sha = DecodeBundleFile(testing::ReadTextFile(bundle), "meta").value().payload_sha256;
  // Metadata strings sit verbatim in the Protobuf bytes.
  for (const std::string& s : {sha, std::string("[\"x0\",\"x1\",\"x2\",\"site=east\",\"site=north\",\"site=west\"]"),
                               std::string("[\"class 0\",\"class 1\",\"class 2\"]"), std::string("synthetic")}) {
    EXPECT_NE(bytes.find(s), std::string::npos) << s;
  }
}

// Bad inputs (docs/bad_inputs.md): exit 2, a message naming the file, and no file left behind.
TEST_F(ExportCommandTest, MissingBundleIsRefused) {
  const std::string onnx = dir_ + "/out.onnx";
  const testing::CommandResult r = Chorus("export " + dir_ + "/absent.chorus --onnx " + onnx);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("absent.chorus"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(onnx));
}

TEST_F(ExportCommandTest, CorruptBundleIsRefused) {
  std::string bytes = EncodeBundleFile(testing::SyntheticBundle({}));
  bytes[bytes.size() / 2] ^= 0x5A;  // a payload byte: the checksum no longer matches
  const std::string bundle = dir_ + "/corrupt.chorus", onnx = dir_ + "/out.onnx";
  testing::WriteTextFile(bundle, bytes);
  const testing::CommandResult r = Chorus("export " + bundle + " --onnx " + onnx);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("corrupt.chorus"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("checksum"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(onnx));
}

TEST_F(ExportCommandTest, MissingOutputDirectoryIsRefused) {
  const std::string bundle = WriteBundle("ok", testing::SyntheticBundle({}));
  const testing::CommandResult r = Chorus("export " + bundle + " --onnx " + dir_ + "/no/such/out.onnx");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find(dir_ + "/no/such"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(dir_ + "/no"));
  const testing::CommandResult into_directory = Chorus("export " + bundle + " --onnx " + dir_);
  EXPECT_EQ(into_directory.exit_code, 2) << into_directory.output;
  EXPECT_NE(into_directory.output.find("is a directory"), std::string::npos) << into_directory.output;
  // Only the bundle is in the directory: no temporary file either.
  EXPECT_EQ(std::distance(fs::directory_iterator(dir_), fs::directory_iterator()), 1);
}

TEST_F(ExportCommandTest, HelpNamesTheInputAndOutputs) {
  const testing::CommandResult r = Chorus("export --help");
  EXPECT_EQ(r.exit_code, 0);
  for (const char* s : {"--onnx", "features", "probabilities", "variance"}) {
    EXPECT_NE(r.output.find(s), std::string::npos) << s;
  }
}

}  // namespace export_command_test
}  // namespace chorus

// End-to-end tests of `chorus predict` and `chorus inspect`: the real executables on small runs
// of the invented demo data (tools/demo_data.cc) and on small IDX files.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <sstream>

#include "bundle.pb.h"
#include "common/basin_scale.h"
#include "common/dataset.h"
#include "common/predictor.h"
#include "coordinator/config_loader.h"
#include "proto/bundle_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/run_dir.h"
#include "tests/testing/reference.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace predict_command_test {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::ReadTextFile;
using testing::RunShell;
using testing::WriteTextFile;

// A parsed prediction CSV: the header and each row's fields.
struct Table {
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
  size_t Column(const std::string& name) const {
    return static_cast<size_t>(std::find(header.begin(), header.end(), name) - header.begin());
  }
};

std::vector<std::string> SplitLine(const std::string& line) {
  std::vector<std::string> fields;
  std::stringstream in(line);
  for (std::string field; std::getline(in, field, ',');) fields.push_back(field);
  return fields;
}

Table ReadTable(const std::string& path) {
  std::stringstream in(ReadTextFile(path));
  Table t;
  std::string line;
  std::getline(in, line);
  t.header = SplitLine(line);
  while (std::getline(in, line)) t.rows.push_back(SplitLine(line));
  return t;
}

double Number(const std::string& text) { return std::strtod(text.c_str(), nullptr); }

// rows x classes probabilities from the p_<class> columns, in the data's class order.
MatrixD Probabilities(const Table& t, const std::vector<std::string>& class_names) {
  MatrixD p(static_cast<Eigen::Index>(t.rows.size()),
            static_cast<Eigen::Index>(class_names.size()));
  for (size_t k = 0; k < class_names.size(); ++k) {
    const size_t column = t.Column("p_" + class_names[k]);
    EXPECT_LT(column, t.header.size()) << "no column p_" << class_names[k];
    for (size_t i = 0; i < t.rows.size() && column < t.header.size(); ++i) {
      p(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(k)) = Number(t.rows[i][column]);
    }
  }
  return p;
}

class PredictCommandTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-predict");
    const auto r = RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                            "/data --train-rows 1200 --test-rows 400");
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  testing::CommandResult Chorus(const std::string& args) {
    return RunShell(testing::BinaryPath("chorus") + " " + args, 300);
  }

  // Runs a config (YAML text, data paths relative to dir_) and returns its run directory.
  std::string Run(const std::string& name, const std::string& yaml) {
    const std::string config = dir_ + "/" + name + ".yaml";
    WriteTextFile(config, "run: {name: " + name + ", seed: 4}\n" + yaml);
    const auto r = Chorus("run " + config + " --out " + dir_ + "/runs-" + name);
    EXPECT_EQ(r.exit_code, 0) << r.output;
    for (const auto& e : fs::directory_iterator(dir_ + "/runs-" + name)) {
      if (e.path().filename().string().rfind(name + "-", 0) == 0) return e.path().string();
    }
    return "";
  }

  // The prepared data of the run made by Run(name): its config loaded again, in process.
  PreparedData RunData(const std::string& name) {
    const StatusOr<Config> config = LoadConfigFile(dir_ + "/" + name + ".yaml");
    if (!config.ok()) {
      ADD_FAILURE() << config.status().ToString();
      return {};
    }
    StatusOr<PreparedData> data = LoadPreparedData(config.value().data, config.value().run.seed);
    if (!data.ok()) ADD_FAILURE() << data.status().ToString();
    return data.ok() ? std::move(data).value() : PreparedData{};
  }

  static json Report(const std::string& run) {
    return json::parse(ReadTextFile(run + "/report.json"));
  }

  std::string dir_;
};

constexpr char kClassification[] =
    "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
    "       categorical: [station]}\n"
    "model: {hidden: [16]}\ntrain: {epochs: 3, batch_size: 32}\n"
    "ensemble: {members: 3, weighting: stacking,\n"
    "  basin: {method: gaussian_lowrank, epochs: 1, snapshots: 4, rank: 3, samples: 2}}\n";

void ExpectScoresEqualReport(const MatrixD& p, const PreparedData& data, const json& report) {
  const ClassificationMetrics got = ScoreClassification(p, data.test.labels, 15);
  const json& want = report["ensemble"]["test"];
  EXPECT_EQ(got.accuracy, want["accuracy"].get<double>());
  EXPECT_EQ(got.nll, want["nll"].get<double>());
  EXPECT_EQ(got.brier, want["brier"].get<double>());
  EXPECT_EQ(got.ece, want["ece"].get<double>());
}

TEST_F(PredictCommandTest, ReproducesTheReportOnTheRunsOwnTestRows) {
  const std::string run = Run("cls", kClassification);
  const std::string test_csv = dir_ + "/data/alarms_test.csv";
  for (const char* threads : {"1", "2"}) {
    const auto r = Chorus("predict " + run + "/bundle.chorus " + test_csv + " -o " + dir_ + "/p" +
                          threads + ".csv --threads " + threads);
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  EXPECT_EQ(ReadTextFile(dir_ + "/p1.csv"), ReadTextFile(dir_ + "/p2.csv")) << "1 vs 2 threads";
  // The same rows compressed by gzip(1) (Debian's gzip): the same output, byte for byte.
  ASSERT_EQ(testing::RunShell("gzip -c " + test_csv + " > " + test_csv + ".gz").exit_code, 0);
  const auto gz = Chorus("predict " + run + "/bundle.chorus " + test_csv + ".gz -o " + dir_ + "/pgz.csv");
  ASSERT_EQ(gz.exit_code, 0) << gz.output;
  EXPECT_EQ(ReadTextFile(dir_ + "/pgz.csv"), ReadTextFile(dir_ + "/p1.csv")) << "gzip input";
  const PreparedData data = RunData("cls");
  const Table t = ReadTable(dir_ + "/p1.csv");
  ASSERT_EQ(t.rows.size(), 400u);
  EXPECT_EQ(t.header[0], "line");
  EXPECT_EQ(t.rows[0][0], "2");
  const MatrixD p = Probabilities(t, data.class_names);
  for (Eigen::Index i = 0; i < p.rows(); ++i) EXPECT_NEAR(p.row(i).sum(), 1.0, 1e-12) << i;
  const json report = Report(run);
  ExpectScoresEqualReport(p, data, report);
  // scikit-learn's log_loss on the written probabilities (Debian python3-sklearn).
  const auto reference = testing::ParseReferenceOutput(testing::RunReferenceScript(
      "sklearn_log_loss_csv.py", {dir_ + "/p1.csv", test_csv, "cause"}));
  ASSERT_EQ(reference.count("nll"), 1u);
  EXPECT_NEAR(reference.at("nll")[0], report["ensemble"]["test"]["nll"].get<double>(), 1e-12);
}

// basin.scale: tune picks a scale from BasinScaleCandidates() on validation and redraws every
// sample at it; the bundle carries the chosen scale, so predict still reproduces the report.
TEST_F(PredictCommandTest, TunedBasinScaleIsCarriedIntoTheBundle) {
  std::string yaml = kClassification;
  yaml.replace(yaml.find("samples: 2}"), 11, "samples: 2, scale: tune}");
  const std::string run = Run("tuned", yaml);
  const json report = Report(run);
  const double scale = report["basin_scale"].get<double>();
  const auto& grid = BasinScaleCandidates();
  EXPECT_NE(std::find(grid.begin(), grid.end(), scale), grid.end()) << scale;
  const auto r = Chorus("predict " + run + "/bundle.chorus " + dir_ + "/data/alarms_test.csv -o " +
                        dir_ + "/tuned.csv");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const PreparedData data = RunData("tuned");
  ExpectScoresEqualReport(Probabilities(ReadTable(dir_ + "/tuned.csv"), data.class_names), data, report);
}

TEST_F(PredictCommandTest, RegressionReproducesRmseCoverageAndNll) {
  const std::string run = Run(
      "reg",
      "data: {train: data/faults_train.csv, test: data/faults_test.csv, task: regression,\n"
      "       target: hours_to_fault, categorical: [station]}\n"
      "model: {hidden: [16]}\ntrain: {epochs: 3, batch_size: 32}\n"
      "ensemble: {members: 2, basin: {method: gaussian_diag, epochs: 1, snapshots: 4, rank: 2,\n"
      "                                samples: 3}}\n");
  const std::string bundle = run + "/bundle.chorus";
  const auto r =
      Chorus("predict " + bundle + " " + dir_ + "/data/faults_test.csv -o " + dir_ + "/reg.csv");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const Table t = ReadTable(dir_ + "/reg.csv");
  EXPECT_EQ(t.header,
            (std::vector<std::string>{"line", "mean", "total_std", "epistemic_std", "q05", "q95"}));
  const PreparedData data = RunData("reg");
  ASSERT_EQ(t.rows.size(), data.test.targets.size());
  double squares = 0, inside = 0;
  std::vector<double> y;  // the targets as the run scores them (common/evaluation.cc)
  for (size_t i = 0; i < t.rows.size(); ++i) {
    y.push_back(static_cast<double>(data.test.targets[i]) * data.target_scale + data.target_mean);
    const double err = y[i] - Number(t.rows[i][1]);
    squares += err * err;
    inside += Number(t.rows[i][4]) <= y[i] && y[i] <= Number(t.rows[i][5]) ? 1 : 0;
  }
  const json report = Report(run);
  const json& want = report["ensemble"]["test"];
  EXPECT_EQ(std::sqrt(squares / static_cast<double>(y.size())), want["rmse"].get<double>());
  EXPECT_EQ(inside / static_cast<double>(y.size()), want["coverage_90"].get<double>());
  // The NLL needs the whole mixture, which the CSV does not hold: the same bundle in process.
  const Predictor predictor = Predictor::Create(ReadBundleFile(bundle).value().bundle).value();
  const Prediction p = predictor.Predict(data.test.x);
  EXPECT_EQ(ScoreRegression(p.regression.mixture, y).nll, want["nll"].get<double>());
  EXPECT_EQ(Number(t.rows[7][1]), p.regression.mean[7]);
}

// IDX bytes: magic 0x0000TTDD, big-endian uint32 sizes, then the elements.
std::string Idx(const std::vector<uint32_t>& dims, const std::string& elements) {
  std::string bytes = {0, 0, 0x08, static_cast<char>(dims.size())};
  for (uint32_t d : dims) {
    for (int shift = 24; shift >= 0; shift -= 8) bytes += static_cast<char>((d >> shift) & 0xFF);
  }
  return bytes + elements;
}

// n 4x4 images of noise whose label (0..2) is decided by which third holds the brightest pixel.
void WriteIdxData(const std::string& prefix, uint32_t n, uint64_t seed) {
  std::string pixels, labels;
  for (uint32_t i = 0; i < n; ++i) {
    int brightest = 0, best = -1;
    for (int j = 0; j < 16; ++j) {
      seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
      const int v = static_cast<int>(seed >> 56);
      pixels += static_cast<char>(v);
      if (v > best) best = v, brightest = j;
    }
    labels += static_cast<char>(brightest * 3 / 16);
  }
  WriteTextFile(prefix + "-images.idx", Idx({n, 4, 4}, pixels));
  WriteTextFile(prefix + "-labels.idx", Idx({n}, labels));
}

TEST_F(PredictCommandTest, IdxImagesReproduceTheRun) {
  WriteIdxData(dir_ + "/train", 600, 1);
  WriteIdxData(dir_ + "/test", 1100, 2);  // more than one 1024-row batch
  const std::string run =
      Run("idx",
          "data: {format: idx, train: {images: train-images.idx, labels: train-labels.idx},\n"
          "       test: {images: test-images.idx, labels: test-labels.idx}}\n"
          "model: {hidden: [8]}\ntrain: {epochs: 2, batch_size: 50}\nensemble: {members: 2}\n");
  ASSERT_EQ(RunShell("gzip -k " + dir_ + "/test-images.idx").exit_code, 0);
  const auto r = Chorus("predict " + run + "/bundle.chorus " + dir_ + "/test-images.idx.gz -o " +
                        dir_ + "/idx.csv --threads 2");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const Table t = ReadTable(dir_ + "/idx.csv");
  ASSERT_EQ(t.rows.size(), 1100u);
  EXPECT_EQ(t.header[0], "index");
  EXPECT_EQ(t.rows[1099][0], "1099");
  const PreparedData data = RunData("idx");
  ExpectScoresEqualReport(Probabilities(t, data.class_names), data, Report(run));
}

// Convolutional members (model.conv) through the whole path on IDX images: members with low-rank
// basin fits, and members with a last-layer Laplace fit on the stages' own output (no hidden
// layer). `chorus predict` reproduces each run's report, the low-rank run's result bytes are the
// same on one and two threads, and inspect names the stages.
TEST_F(PredictCommandTest, ConvolutionalMembersReproduceTheRunOnAnyThreadCount) {
  WriteIdxData(dir_ + "/train", 600, 1);
  WriteIdxData(dir_ + "/test", 300, 2);
  const std::string data =
      "data: {format: idx, train: {images: train-images.idx, labels: train-labels.idx},\n"
      "       test: {images: test-images.idx, labels: test-labels.idx}}\n"
      "train: {epochs: 2, batch_size: 50}\n";
  const std::string low_rank = data +
      "model: {image: [1, 4, 4], conv: [{channels: 4, kernel: 3, pool: max}], hidden: [8]}\n"
      "ensemble: {members: 2, basin: {method: gaussian_lowrank, epochs: 1, snapshots: 4, rank: 3, samples: 2}}\n";
  const std::string laplace = data +
      "model: {image: [1, 4, 4], conv: [{channels: 3, kernel: 3, pool: average}, {channels: 4, kernel: 1, pool: none}],\n"
      "        hidden: []}\n"
      "ensemble: {members: 2, basin: {method: laplace_last_layer, samples: 3}}\n";
  for (const auto& [name, yaml] : {std::pair<std::string, std::string>{"convlr", low_rank}, {"convla", laplace}}) {
    SCOPED_TRACE(name);
    const std::string run = Run(name, yaml);
    ASSERT_FALSE(run.empty());
    const auto r = Chorus("predict " + run + "/bundle.chorus " + dir_ + "/test-images.idx -o " + dir_ +
                          "/" + name + ".csv --threads 2");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    const PreparedData prepared = RunData(name);
    ExpectScoresEqualReport(Probabilities(ReadTable(dir_ + "/" + name + ".csv"), prepared.class_names),
                            prepared, Report(run));
    if (name != "convlr") continue;  // one thread-count check is enough (CI time)
    const std::string one_thread = dir_ + "/runs-" + name + "-1";
    ASSERT_EQ(Chorus("run " + dir_ + "/" + name + ".yaml --threads 1 --out " + one_thread).exit_code, 0);
    EXPECT_TRUE(testing::JobResults(run) == testing::JobResults(testing::RunDirUnder(one_thread)))
        << "two threads vs one";
  }
  // An image shape that does not hold the data's features is refused before anything is written.
  WriteTextFile(dir_ + "/wrong.yaml", "run: {name: wrong}\n" + data +
                "model: {image: [1, 4, 5], conv: [{channels: 4}]}\n");
  const auto wrong = Chorus("run " + dir_ + "/wrong.yaml --out " + dir_ + "/runs-wrong");
  EXPECT_EQ(wrong.exit_code, 2) << wrong.output;
  EXPECT_NE(wrong.output.find("wrong.yaml: model.image: image 1 x 4 x 5 holds 20 values per row, but the data "
                              "has 16 features"),
            std::string::npos)
      << wrong.output;
  EXPECT_FALSE(fs::exists(dir_ + "/runs-wrong"));
  const auto inspect = Chorus("inspect " + testing::RunDirUnder(dir_ + "/runs-convlr") + "/bundle.chorus");
  EXPECT_NE(inspect.output.find("image 1x4x4, conv 4@3x3/max, dense 16-8-3"), std::string::npos) << inspect.output;
}

TEST_F(PredictCommandTest, InvalidRowsStopWithExitTwoUnlessSkipped) {
  const std::string run = Run("bad", kClassification);
  std::stringstream test(ReadTextFile(dir_ + "/data/alarms_test.csv"));
  std::string header, text, line;
  std::getline(test, header);
  for (int i = 0; i < 6 && std::getline(test, line); ++i) text += line + "\n";
  std::vector<std::string> lines;
  for (std::stringstream in(text); std::getline(in, line);) lines.push_back(line);
  lines[1].replace(lines[1].find(',') + 1, 0, "abc");  // line 3: "abc5.1" in a numeric column
  lines[3] = "fenside,1,2";                            // line 5: ragged
  std::string bad = header + "\n";
  for (const std::string& l : lines) bad += l + "\n";
  WriteTextFile(dir_ + "/bad.csv", bad);
  const std::string predict =
      "predict " + run + "/bundle.chorus " + dir_ + "/bad.csv -o " + dir_ + "/out.csv";
  auto r = Chorus(predict);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find(dir_ + "/bad.csv:3:2: expected a number in column"), std::string::npos)
      << r.output;
  EXPECT_FALSE(fs::exists(dir_ + "/out.csv"));
  for (const auto& e : fs::directory_iterator(dir_)) {
    EXPECT_EQ(e.path().string().find("out.csv.tmp"), std::string::npos) << "left " << e.path();
  }
  r = Chorus(predict + " --skip-bad-rows");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("bad.csv:5:4: expected 8 fields, found 3"), std::string::npos)
      << r.output;
  EXPECT_NE(r.output.find("4 rows predicted, 2 invalid rows skipped"), std::string::npos);
  const Table t = ReadTable(dir_ + "/out.csv");
  std::vector<std::string> ids;
  for (const auto& row : t.rows) ids.push_back(row[0]);
  EXPECT_EQ(ids, (std::vector<std::string>{"2", "4", "6", "7"}));
}

// alarms_shifted.csv (tools/demo_data.cc) names the columns in the training order but holds its
// values in another: a header/value mismatch that every row shows as values far outside the
// training ranges. The test split is in range.
TEST_F(PredictCommandTest, RowsFarOutsideTheTrainingDataAreReportedOrRefused) {
  const std::string run = Run("ranges", kClassification);
  const std::string bundle = run + "/bundle.chorus";
  auto r = Chorus("predict " + bundle + " " + dir_ + "/data/alarms_test.csv -o " + dir_ +
                  "/test.csv");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("400 rows predicted, 0 invalid rows skipped, 0 rows far outside"),
            std::string::npos)
      << r.output;

  const std::string shifted = dir_ + "/data/alarms_shifted.csv";
  r = Chorus("predict " + bundle + " " + shifted + " -o " + dir_ + "/shifted.csv --log-format json");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_TRUE(fs::exists(dir_ + "/shifted.csv"));
  // One warning for the one batch, naming its lines and the columns at fault, then the summary.
  std::stringstream lines(r.output);
  json batch, summary;
  for (std::string l; std::getline(lines, l);) {
    const json j = json::parse(l, nullptr, false);
    ASSERT_TRUE(j.is_object()) << l;
    if (j.contains("batch_rows")) batch = j;
    if (j.contains("rows")) summary = j;
  }
  ASSERT_TRUE(batch.is_object()) << r.output;
  EXPECT_EQ(batch["level"], "warning");
  EXPECT_EQ(batch["first_line"], 2);
  EXPECT_EQ(batch["last_line"], 401);
  const int64_t outside = batch["out_of_range_rows"].get<int64_t>();
  EXPECT_GT(outside, 300) << r.output;  // most rows: the values sit in the wrong columns
  ASSERT_TRUE(batch["columns"].is_object());
  int64_t blamed = 0;
  for (const auto& [column, rows] : batch["columns"].items()) {
    EXPECT_NE(column, "station");  // the only column still in its place
    blamed += rows.get<int64_t>();
  }
  EXPECT_GE(blamed, outside);  // every flagged row has a column at fault
  // days_since_service (about 50-250) lands in discharge_bar (about 2-6 in training).
  EXPECT_GT(batch["columns"].value("discharge_bar", 0), 300) << batch.dump();
  EXPECT_NE(batch["msg"].get<std::string>().find("training range ["), std::string::npos);
  EXPECT_EQ(summary["out_of_range_rows"], outside);

  r = Chorus("predict " + bundle + " " + shifted + " -o " + dir_ + "/refused.csv " +
             "--refuse-out-of-range");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("alarms_shifted.csv lines 2-401: " + std::to_string(outside) +
                          " of 400 rows far outside the training data"),
            std::string::npos)
      << r.output;
  EXPECT_FALSE(fs::exists(dir_ + "/refused.csv"));
  for (const auto& e : fs::directory_iterator(dir_)) {
    EXPECT_EQ(e.path().string().find("refused.csv.tmp"), std::string::npos) << "left " << e.path();
  }
}

TEST_F(PredictCommandTest, TargetColumnMayBeAbsentButFeatureColumnsMayNot) {
  const std::string run = Run("cols", kClassification);
  const std::string bundle = run + "/bundle.chorus";
  std::stringstream in(ReadTextFile(dir_ + "/data/alarms_test.csv"));
  std::string no_target, no_station, line;
  while (std::getline(in, line)) {
    no_target += line.substr(0, line.rfind(',')) + "\n";   // cause is the last column
    no_station += line.substr(line.find(',') + 1) + "\n";  // station is the first
  }
  WriteTextFile(dir_ + "/no_target.csv", no_target);
  WriteTextFile(dir_ + "/no_station.csv", no_station);
  ASSERT_EQ(Chorus("predict " + bundle + " " + dir_ + "/data/alarms_test.csv -o " + dir_ + "/a.csv")
                .exit_code,
            0);
  ASSERT_EQ(
      Chorus("predict " + bundle + " " + dir_ + "/no_target.csv -o " + dir_ + "/b.csv").exit_code,
      0);
  EXPECT_EQ(ReadTextFile(dir_ + "/a.csv"), ReadTextFile(dir_ + "/b.csv"));
  const auto r = Chorus("predict " + bundle + " " + dir_ + "/no_station.csv -o " + dir_ + "/c.csv");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("no_station.csv:1: expected a feature column \"station\""),
            std::string::npos)
      << r.output;
}

// Each corrupt file is refused by inspect and predict with exit 2, under a 1 GiB address-space
// limit: a large allocation would fail and exit 1 instead. (Sanitizers reserve terabytes of
// address space for their shadow memory, so there the limit is ASan's instead: any single
// allocation over 1 GiB fails, as it would under the address-space limit.)
TEST_F(PredictCommandTest, CorruptBundlesExitTwoWithoutLargeAllocations) {
  const std::string run = Run("corrupt", kClassification);
  const std::string good = ReadTextFile(run + "/bundle.chorus");
  const std::string payload =
      good.substr(kBundleHeaderBytes, good.size() - kBundleHeaderBytes - kBundleChecksumBytes);
  bundle::Bundle absurd;
  ASSERT_TRUE(absurd.ParseFromString(payload));
  absurd.set_widths(1, 1 << 24);
  absurd.set_widths(2, 1 << 24);
  std::string flipped = good, version = good;
  flipped[good.size() / 2] ^= 0x10;
  version[8] = 2;
  const std::vector<std::pair<std::string, std::string>> cases = {
      {"truncated", good.substr(0, good.size() - 100)},
      {"flipped", flipped},
      {"version", version},
      {"absurd", testing::FrameBundlePayload(absurd.SerializeAsString())}};
#if defined(CHORUS_SANITIZED)
  const std::string limit =
      "ASAN_OPTIONS=\"$ASAN_OPTIONS:max_allocation_size_mb=1024:allocator_may_return_null=1\" ";
#else
  const std::string limit = "ulimit -v 1048576; ";
#endif
  for (const auto& [name, bytes] : cases) {
    SCOPED_TRACE(name);
    const std::string path = dir_ + "/" + name + ".chorus";
    WriteTextFile(path, bytes);
    auto r = RunShell(limit + testing::BinaryPath("chorus") + " inspect " + path);
    EXPECT_EQ(r.exit_code, 2) << r.output;
    EXPECT_NE(r.output.find("chorus inspect: invalid input: " + path + ": "), std::string::npos)
        << r.output;
    r = RunShell(limit + testing::BinaryPath("chorus") + " predict " + path + " " + dir_ +
                 "/data/alarms_test.csv -o " + dir_ + "/out.csv");
    EXPECT_EQ(r.exit_code, 2) << r.output;
    EXPECT_FALSE(fs::exists(dir_ + "/out.csv"));
  }
  const auto r =
      RunShell(limit + testing::BinaryPath("chorus") + " inspect " + run + "/bundle.chorus");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  for (const char* fact : {"checksum      OK", "task          classification, 5 classes",
                           "gaussian_lowrank (rank 3)", "temperature", "data hash"}) {
    EXPECT_NE(r.output.find(fact), std::string::npos) << fact << "\n" << r.output;
  }
}

TEST_F(PredictCommandTest, BothCommandsHaveHelp) {
  auto r = Chorus("predict --help");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  for (const char* flag : {"--skip-bad-rows", "--threads", "--format", "-o,--output"}) {
    EXPECT_NE(r.output.find(flag), std::string::npos) << flag;
  }
  r = Chorus("inspect --help");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("checksum"), std::string::npos) << r.output;
}

}  // namespace predict_command_test
}  // namespace chorus

#include "coordinator/config_loader.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "tests/testing/reference.h"

namespace chorus {
namespace config_loader_test {

constexpr const char* kMinimal = R"(data:
  train: d/train.csv
  test: d/test.csv
  target: y
)";

TEST(ConfigLoaderTest, EveryShippedConfigLoads) {
  int loaded = 0;
  for (const auto& entry : std::filesystem::directory_iterator(testing::SourcePath("configs"))) {
    if (entry.path().extension() != ".yaml") continue;
    StatusOr<Config> c = LoadConfigFile(entry.path().string());
    EXPECT_TRUE(c.ok()) << entry.path() << ": " << c.status().ToString();
    ++loaded;
  }
  EXPECT_GE(loaded, 3);
}

TEST(ConfigLoaderTest, DefaultsFillMissingKeysAndPathsResolveAgainstTheConfigFile) {
  StatusOr<Config> c = ParseConfig(kMinimal, "/etc/chorus/a.yaml");
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  EXPECT_EQ(c.value().data.train, "/etc/chorus/d/train.csv");
  EXPECT_EQ(c.value().train.epochs, 20);
  EXPECT_EQ(c.value().ensemble.min_members, c.value().ensemble.members);
  EXPECT_TRUE(c.value().ensemble.tune_temperature);
}

TEST(ConfigLoaderTest, ResolvedYamlLoadsBackToTheSameConfig) {
  const std::string text = std::string(kMinimal) +
      "train: {schedule: {kind: step, every_epochs: 3, factor: 0.5}, optimizer: {lr: 0.125}}\n"
      "ensemble: {members: 4, min_members: 2, temperature: 1.5, weighting: greedy,\n"
      "  basin: {method: gaussian_diag, snapshots: 9, rank: 3, samples: 4, scale: 0.5}}\n"
      "model: {hidden: [7, 5]}\n";
  StatusOr<Config> a = ParseConfig(text, "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/elsewhere/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString() << "\n" << ConfigToYaml(a.value());
  EXPECT_EQ(ConfigToYaml(a.value()), ConfigToYaml(b.value()));
  EXPECT_EQ(ConfigHash(a.value()), ConfigHash(b.value()));
  EXPECT_EQ(b.value().train.schedule.step_every_epochs, 3);
  EXPECT_FALSE(b.value().ensemble.tune_temperature);
  EXPECT_DOUBLE_EQ(b.value().ensemble.temperature, 1.5);
  EXPECT_EQ(b.value().ensemble.weighting, Weighting::kGreedy);
  EXPECT_EQ(b.value().ensemble.basin.method, BasinMethod::kGaussianDiag);
  EXPECT_EQ(b.value().ensemble.basin.samples, 4);
  EXPECT_DOUBLE_EQ(b.value().ensemble.basin.scale, 0.5);
}

TEST(ConfigLoaderTest, HashIgnoresSpeedOnlySettingsButNotModelSettings) {
  Config a = ParseConfig(kMinimal, "/x/a.yaml").value();
  Config b = a;
  b.compute.threads = 7;
  b.run.out_dir = "/tmp/other";
  EXPECT_EQ(ConfigHash(a), ConfigHash(b));
  b.train.optimizer.lr *= 2;
  EXPECT_NE(ConfigHash(a), ConfigHash(b));
}

// train.products changes the arithmetic, so it is part of the hash; it round-trips and defaults
// to fp32.
TEST(ConfigLoaderTest, ProductPrecisionLoadsRoundTripsAndChangesTheHash) {
  const Config fp32 = ParseConfig(kMinimal, "/x/a.yaml").value();
  EXPECT_EQ(fp32.train.products, ProductPrecision::kFp32);
  StatusOr<Config> bf16 = ParseConfig(std::string(kMinimal) + "train: {products: bf16}\n", "/x/a.yaml");
  ASSERT_TRUE(bf16.ok()) << bf16.status().ToString();
  EXPECT_EQ(bf16.value().train.products, ProductPrecision::kBf16);
  EXPECT_NE(ConfigHash(fp32), ConfigHash(bf16.value()));
  StatusOr<Config> again = ParseConfig(ConfigToYaml(bf16.value()), "/y/b.yaml");
  ASSERT_TRUE(again.ok()) << again.status().ToString();
  EXPECT_EQ(again.value().train.products, ProductPrecision::kBf16);
}

TEST(ConfigLoaderTest, ConvolutionStagesLoadRoundTripAndChangeTheHash) {
  const std::string text = std::string(kMinimal) +
      "model:\n  image: [3, 32, 30]\n  conv:\n    - {channels: 8, kernel: 5, pool: average}\n"
      "    - {channels: 16}\n  hidden: [32]\n";
  StatusOr<Config> a = ParseConfig(text, "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_TRUE(a.value().model.image == (ImageShape{3, 32, 30}));
  ASSERT_EQ(a.value().model.conv.size(), 2u);
  EXPECT_TRUE(a.value().model.conv[0] == (ConvStage{8, 5, Pooling::kAverage}));
  EXPECT_TRUE(a.value().model.conv[1] == (ConvStage{16, 3, Pooling::kMax}));  // the defaults
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/y/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString();
  EXPECT_EQ(ConfigHash(a.value()), ConfigHash(b.value()));
  Config c = a.value();
  c.model.conv[1].pool = Pooling::kNone;
  EXPECT_NE(ConfigHash(a.value()), ConfigHash(c));
}

TEST(ConfigLoaderTest, BadConvolutionStagesNameTheKeyAndLine) {
  const auto error = [](const std::string& model) {
    StatusOr<Config> c = ParseConfig(std::string(kMinimal) + model, "/x/a.yaml");
    return c.ok() ? std::string("loaded") : c.status().message();
  };
  EXPECT_EQ(error("model: {image: [1, 28, 28], conv: [{channels: 8, kernel: 4}]}\n"),
            "/x/a.yaml:5:58: model.conv[0].kernel: expected an odd kernel size (the padding keeps the image size), found 4");
  EXPECT_EQ(error("model: {conv: [{channels: 8}]}\n"),
            "/x/a.yaml:5:15: model.image: convolution stages need the input's shape, e.g. image: [1, 28, 28] (channels, height, width)");
  EXPECT_EQ(error("model: {image: [1, 28], conv: [{channels: 8}]}\n"),
            "/x/a.yaml:5:16: model.image: expected [channels, height, width], each in [1, 65536], e.g. [1, 28, 28]");
  EXPECT_EQ(error("model: {image: [1, 2, 2], conv: [{channels: 8}, {channels: 8}]}\n"),
            "/x/a.yaml:5:33: model.conv: stage 2: its input is 1 x 1, too small to pool 2 x 2");
  EXPECT_EQ(error("model: {image: [1, 8, 8], conv: [{channels: 8, pool: min}]}\n"),
            "/x/a.yaml:5:54: model.conv[0].pool: expected one of none, max, average, found \"min\"");
  EXPECT_EQ(error("model: {image: [1, 8, 8]}\n"),
            "/x/a.yaml:5:16: model.image: only used with conv stages; add model.conv or remove it");
}

TEST(ConfigLoaderTest, SmallDataKeysSearchGridAndTheirRoundTrip) {
  const std::string text = std::string(kMinimal) +
      "  small_data_rows: 500\n"
      "  validation: {folds: 4}\n"
      "train: {early_stopping: {mode: on, patience: 3}, beta_nll: 0.25}\n"
      "search: {weight_decay: [1.0e-4, 0.01], hidden: [[8], [16, 16]], beta_nll: [0, 1]}\n";
  StatusOr<Config> a = ParseConfig(text, "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a.value().data.small_data_rows, 500);
  EXPECT_EQ(a.value().data.folds, 4);
  EXPECT_EQ(a.value().train.early_stopping.mode, Switch::kOn);
  EXPECT_EQ(a.value().train.early_stopping.patience, 3);
  EXPECT_DOUBLE_EQ(a.value().train.beta_nll, 0.25);
  EXPECT_EQ(a.value().search.hidden, (std::vector<std::vector<int>>{{8}, {16, 16}}));
  EXPECT_EQ(a.value().search.weight_decay, (std::vector<double>{1e-4, 0.01}));
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/y/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString() << "\n" << ConfigToYaml(a.value());
  EXPECT_EQ(ConfigHash(a.value()), ConfigHash(b.value()));
  EXPECT_EQ(b.value().search.beta_nll, (std::vector<double>{0, 1}));
  Config c = a.value();
  c.search.lr = {0.5};
  EXPECT_NE(ConfigHash(a.value()), ConfigHash(c)) << "the search grid changes the model";
}

TEST(ConfigLoaderTest, FoldsAreAutoUnlessTheConfigNamesAHoldout) {
  EXPECT_EQ(ParseConfig(kMinimal, "a.yaml").value().data.folds, -1);
  EXPECT_EQ(ParseConfig(std::string(kMinimal) + "  validation: {fraction: 0.2}\n", "a.yaml").value().data.folds, 0);
  EXPECT_EQ(ParseConfig(std::string(kMinimal) + "  validation: {file: v.csv}\n", "a.yaml").value().data.folds, 0);
  EXPECT_EQ(ParseConfig(std::string(kMinimal) + "  validation: {fraction: 0.2, folds: auto}\n", "a.yaml")
                .value().data.folds, -1);
  EXPECT_EQ(ParseConfig(std::string(kMinimal) + "  validation: {folds: 0}\n", "a.yaml").value().data.folds, 0);
}

struct BadConfig {
  const char* name;
  const char* yaml;
  const char* expected;  // substring of the message, including the place
};

// Table-driven: each bad config is refused as kInvalidInput naming file:line:column and the key.
TEST(ConfigLoaderTest, BadConfigsAreRejectedWithTheirPlace) {
  const BadConfig cases[] = {
      BadConfig{"UnknownTopKey", "data: {train: a, test: b, target: y}\nmodle: {}\n",
                  "cfg.yaml:2:1: modle: unknown key"},
      BadConfig{"UnknownNestedKey", "data: {train: a, test: b, target: y}\ntrain:\n  epoch: 3\n",
                  "cfg.yaml:3:3: train.epoch: unknown key"},
      BadConfig{"WrongType", "data: {train: a, test: b, target: y}\ntrain:\n  epochs: many\n",
                  "cfg.yaml:3:11: train.epochs: expected an epoch count, found \"many\""},
      BadConfig{"OutOfRange", "data: {train: a, test: b, target: y}\ntrain: {batch_size: 0}\n",
                  "cfg.yaml:2:21: train.batch_size: expected a batch size in [1,"},
      BadConfig{"ZeroMembers", "data: {train: a, test: b, target: y}\nensemble: {members: 0}\n",
                "cfg.yaml:2:21: ensemble.members: expected a member count in [1, 100000], found 0"},
      BadConfig{"NegativeEpochs", "data: {train: a, test: b, target: y}\ntrain: {epochs: -3}\n",
                "cfg.yaml:2:17: train.epochs: expected an epoch count in [1, 1000000], found -3"},
      // Too large for an int: yaml-cpp cannot decode it, so it is reported as the wrong type
      // rather than out of range.
      BadConfig{"OverflowingEpochs", "data: {train: a, test: b, target: y}\ntrain: {epochs: 99999999999}\n",
                "cfg.yaml:2:17: train.epochs: expected an epoch count, found \"99999999999\""},
      // NaN fails every comparison, so the range check refuses it like any value outside it.
      BadConfig{"NanLearningRate", "data: {train: a, test: b, target: y}\ntrain: {optimizer: {lr: .nan}}\n",
                "cfg.yaml:2:25: train.optimizer.lr: expected a learning rate in [1e-12, 1e+06], found .nan"},
      BadConfig{"ZeroLearningRate", "data: {train: a, test: b, target: y}\ntrain: {optimizer: {lr: 0}}\n",
                "cfg.yaml:2:25: train.optimizer.lr: expected a learning rate in [1e-12, 1e+06], found 0"},
      BadConfig{"NegativeLearningRate", "data: {train: a, test: b, target: y}\ntrain: {optimizer: {lr: -1}}\n",
                "cfg.yaml:2:25: train.optimizer.lr: expected a learning rate in [1e-12, 1e+06], found -1"},
      BadConfig{"FractionAboveHalf", "data: {train: a, test: b, target: y, validation: {fraction: 0.7}}\n",
                "cfg.yaml:1:61: data.validation.fraction: expected a fraction in [1e-09, 0.5], found 0.7"},
      BadConfig{"BadEnum", "data: {train: a, test: b, target: y}\nmodel: {activation: swish}\n",
                  "model.activation: expected one of relu, tanh, gelu, found \"swish\""},
      BadConfig{"BadProducts", "data: {train: a, test: b, target: y}\ntrain: {products: fp16}\n",
                "cfg.yaml:2:19: train.products: expected one of fp32, bf16, found \"fp16\""},
      BadConfig{"BadFormat", "data: {format: parquet, train: a, test: b, target: y}\n",
                "cfg.yaml:1:16: data.format: expected one of csv, idx, found \"parquet\""},
      BadConfig{"BadTask", "data: {train: a, test: b, target: y, task: ranking}\n",
                "cfg.yaml:1:44: data.task: expected one of classification, regression, found \"ranking\""},
      BadConfig{"BadOptimizer", "data: {train: a, test: b, target: y}\ntrain: {optimizer: {kind: adam}}\n",
                "cfg.yaml:2:27: train.optimizer.kind: expected sgd, found \"adam\""},
      BadConfig{"MinAboveMembers", "data: {train: a, test: b, target: y}\nensemble: {members: 2, min_members: 3}\n",
                  "ensemble.min_members"},
      BadConfig{"RankAboveSnapshots",
                "data: {train: a, test: b, target: y}\nensemble: {basin: {snapshots: 4, rank: 5}}\n",
                "ensemble.basin.rank: expected a rank (at most snapshots) in [2, 4]"},
      BadConfig{"PartsAboveBatch", "data: {train: a, test: b, target: y}\ntrain: {batch_size: 8, parts: 9}\n",
                "train.parts: expected a part count (at most batch_size) in [1, 8]"},
      BadConfig{"MissingTarget", "data: {train: a, test: b}\n", "data.target: required"},
      // A missing key has no place of its own: the message points at the section that lacks it.
      BadConfig{"MissingTrain", "data: {test: b, target: y}\n", "cfg.yaml:1:7: data.train: required"},
      BadConfig{"MissingData", "run: {seed: 1}\n", "data: required"},
      BadConfig{"NotYaml", "data: [unclosed\n", "cfg.yaml:"},
      BadConfig{"EmptyConfig", "", "cfg.yaml: expected a YAML mapping at the top level"},
      BadConfig{"TopLevelList", "- data\n- train\n", "cfg.yaml: expected a YAML mapping at the top level"},
      // Binding beyond loopback without a token would let anyone on the network submit jobs.
      BadConfig{"ListenBeyondLoopbackWithoutToken",
                "data: {train: a, test: b, target: y}\ncluster: {listen: \"0.0.0.0:7070\"}\n",
                "cfg.yaml:2:19: cluster.listen: listening beyond loopback needs cluster.token_file"},
      BadConfig{"MetricsWithoutPort", "data: {train: a, test: b, target: y}\ncluster: {metrics_listen: localhost}\n",
                "cfg.yaml:2:27: cluster.metrics_listen: expected HOST:PORT"},
      BadConfig{"MetricsPortTooLarge",
                "data: {train: a, test: b, target: y}\ncluster: {metrics_listen: \"127.0.0.1:70000\"}\n",
                "cluster.metrics_listen: expected HOST:PORT"},
      BadConfig{"MetricsInProcess",
                "data: {train: a, test: b, target: y}\ncluster: {local_workers: 0, metrics_listen: \"127.0.0.1:0\"}\n",
                "cluster.metrics_listen: the in-process route (local_workers: 0, no listen) has no coordinator"},
      BadConfig{"BadRunName", "run: {name: ../x}\ndata: {train: a, test: b, target: y}\n",
                  "run.name: expected letters"},
      BadConfig{"OneFold", "data: {train: a, test: b, target: y, validation: {folds: 1}}\n",
                "data.validation.folds: expected auto, 0 (holdout) or 2..50, found 1"},
      BadConfig{"FoldsWithAFile", "data: {train: a, test: b, target: y, validation: {file: v, folds: 3}}\n",
                "data.validation.folds: cross-fitting needs no validation file"},
      BadConfig{"BadEarlyStopping", "data: {train: a, test: b, target: y}\ntrain: {early_stopping: {mode: maybe}}\n",
                "train.early_stopping.mode: expected one of auto, on, off"},
      BadConfig{"BetaAboveOne", "data: {train: a, test: b, target: y}\ntrain: {beta_nll: 2}\n",
                "train.beta_nll: expected a beta in [0, 1]"},
      BadConfig{"SearchNotAList", "data: {train: a, test: b, target: y}\nsearch: {lr: 0.1}\n",
                "search.lr: expected a list of 1 to 20 values"},
      BadConfig{"SearchBadWidth", "data: {train: a, test: b, target: y}\nsearch: {hidden: [[8, 0]]}\n",
                "search.hidden: expected a width in [1, 65536]"},
      BadConfig{"SearchUnknownKey", "data: {train: a, test: b, target: y}\nsearch: {epochs: [1, 2]}\n",
                "search.epochs: unknown key"}};
  for (const BadConfig& c : cases) {
    SCOPED_TRACE(c.name);
    StatusOr<Config> parsed = ParseConfig(c.yaml, "cfg.yaml");
    ASSERT_FALSE(parsed.ok());
    EXPECT_EQ(parsed.status().code(), Status::Code::kInvalidInput);
    EXPECT_NE(parsed.status().message().find(c.expected), std::string::npos) << parsed.status().message();
  }
}

// LoadConfigFile reads at most 1 MiB: a missing file and a larger one are refused before parsing,
// naming the path.
TEST(ConfigLoaderTest, MissingAndOversizedConfigFilesAreRefusedNamingThePath) {
  const std::string dir = testing::MakeTempDir("config_loader");
  const std::string missing = dir + "/missing.yaml";
  StatusOr<Config> c = LoadConfigFile(missing);
  ASSERT_FALSE(c.ok());
  EXPECT_EQ(c.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(c.status().message().find(missing + ": cannot read file:"), std::string::npos)
      << c.status().message();

  const std::string big = dir + "/big.yaml";
  {
    // A valid config padded with a comment to one byte over the limit.
    std::ofstream out(big, std::ios::binary);
    const std::string head = std::string(kMinimal) + "#";
    out << head << std::string((1 << 20) + 1 - head.size() - 1, 'x') << "\n";
  }
  ASSERT_EQ(std::filesystem::file_size(big), (1u << 20) + 1);
  c = LoadConfigFile(big);
  ASSERT_FALSE(c.ok());
  EXPECT_EQ(c.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(c.status().message().find(big + ": file is 1048577 bytes, more than the limit of 1048576"),
            std::string::npos)
      << c.status().message();

  // The same file one byte shorter is within the limit and loads.
  std::filesystem::resize_file(big, 1 << 20);
  c = LoadConfigFile(big);
  EXPECT_TRUE(c.ok()) << c.status().ToString();
  std::filesystem::remove_all(dir);
}

}  // namespace config_loader_test
}  // namespace chorus

namespace chorus {
namespace config_loader_test {

TEST(ConfigLoaderTest, LaplaceBasinAndShiftTestKeysAndTheirRoundTrip) {
  const std::string text = std::string(kMinimal) +
      "  shift_test: d/rotated.csv\n"
      "ensemble:\n  basin: {method: laplace_last_layer, hessian: kronecker, prior_precision: 2.5, samples: 7}\n";
  StatusOr<Config> a = ParseConfig(text, "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  const BasinConfig& basin = a.value().ensemble.basin;
  EXPECT_EQ(basin.method, BasinMethod::kLaplaceLastLayer);
  EXPECT_EQ(basin.hessian, LaplaceHessian::kKronecker);
  EXPECT_EQ(basin.prior_precision, 2.5);
  EXPECT_EQ(a.value().data.shift_test, "/x/d/rotated.csv");
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/y/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString() << "\n" << ConfigToYaml(a.value());
  EXPECT_EQ(ConfigHash(a.value()), ConfigHash(b.value()));
  EXPECT_EQ(b.value().data.shift_test, "/x/d/rotated.csv");
  // The default prior precision is "tune" (0), and it survives the round trip as "tune".
  StatusOr<Config> tuned = ParseConfig(std::string(kMinimal) + "ensemble: {basin: {method: laplace_last_layer}}\n", "a.yaml");
  ASSERT_TRUE(tuned.ok());
  EXPECT_EQ(tuned.value().ensemble.basin.prior_precision, 0);
  EXPECT_NE(ConfigToYaml(tuned.value()).find("prior_precision: tune"), std::string::npos);
  Config other = a.value();
  other.ensemble.basin.prior_precision = 3;
  EXPECT_NE(ConfigHash(a.value()), ConfigHash(other)) << "the prior changes the model";
  const StatusOr<Config> bad = ParseConfig(
      std::string(kMinimal) + "ensemble: {basin: {method: laplace_last_layer, hessian: diagonal}}\n", "cfg.yaml");
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("ensemble.basin.hessian"), std::string::npos) << bad.status().ToString();
}

// Fewer snapshots than the default rank (10) without a rank: the rank follows them down, rather
// than every job being refused later for a rank above its snapshots.
TEST(ConfigLoaderTest, DefaultRankFollowsFewerSnapshots) {
  StatusOr<Config> few = ParseConfig(std::string(kMinimal) + "ensemble: {basin: {method: gaussian_diag, snapshots: 4}}\n", "a.yaml");
  ASSERT_TRUE(few.ok()) << few.status().ToString();
  EXPECT_EQ(few.value().ensemble.basin.rank, 4);
  StatusOr<Config> many = ParseConfig(std::string(kMinimal) + "ensemble: {basin: {method: gaussian_lowrank, snapshots: 40}}\n", "a.yaml");
  ASSERT_TRUE(many.ok());
  EXPECT_EQ(many.value().ensemble.basin.rank, 10);
  EXPECT_FALSE(ParseConfig(std::string(kMinimal) + "ensemble: {basin: {snapshots: 4, rank: 5}}\n", "a.yaml").ok());
}

TEST(ConfigLoaderTest, NllToleranceOfTheAdviceAndItsRoundTrip) {
  StatusOr<Config> a = ParseConfig(std::string(kMinimal) + "report: {nll_tolerance: 0.002}\n", "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a.value().report.nll_tolerance, 0.002);
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/y/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString();
  EXPECT_EQ(b.value().report.nll_tolerance, 0.002);
  StatusOr<Config> unset = ParseConfig(kMinimal, "a.yaml");
  ASSERT_TRUE(unset.ok());
  EXPECT_EQ(unset.value().report.nll_tolerance, 0.01);
  const StatusOr<Config> bad = ParseConfig(std::string(kMinimal) + "report: {nll_tolerance: -1}\n", "cfg.yaml");
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("report.nll_tolerance"), std::string::npos) << bad.status().ToString();
}

TEST(ConfigLoaderTest, CyclicalSgmcmcKeysAndTheirRoundTrip) {
  const std::string text = std::string(kMinimal) +
      "ensemble:\n  basin: {method: cyclical_sgmcmc, sampler: sgld, cycles: 6, exploration: 0.5,\n"
      "          samples_per_cycle: 2, posterior_temperature: 0.3, friction: 0.2}\n";
  StatusOr<Config> a = ParseConfig(text, "/x/a.yaml");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  const SgmcmcConfig& m = a.value().ensemble.basin.sgmcmc;
  EXPECT_EQ(m.sampler, SgmcmcSampler::kSgld);
  EXPECT_EQ(m.cycles, 6);
  EXPECT_EQ(m.exploration_fraction, 0.5);
  EXPECT_EQ(m.samples_per_cycle, 2);
  EXPECT_EQ(m.temperature, 0.3);
  EXPECT_EQ(m.friction, 0.2);
  StatusOr<Config> b = ParseConfig(ConfigToYaml(a.value()), "/y/b.yaml");
  ASSERT_TRUE(b.ok()) << b.status().ToString() << "\n" << ConfigToYaml(a.value());
  EXPECT_EQ(ConfigHash(a.value()), ConfigHash(b.value()));
  Config warmer = a.value();
  warmer.ensemble.basin.sgmcmc.temperature = 1;
  EXPECT_NE(ConfigHash(a.value()), ConfigHash(warmer)) << "the temperature changes the samples";
  for (const auto& [yaml, place] : {std::pair<std::string, std::string>{
                                        "ensemble: {basin: {method: cyclical_sgmcmc, scale: tune}}\n", "ensemble.basin.scale"},
                                    {"ensemble: {basin: {method: cyclical_sgmcmc, sampler: langevin}}\n", "ensemble.basin.sampler"},
                                    {"ensemble: {basin: {method: cyclical_sgmcmc, exploration: 1}}\n", "ensemble.basin.exploration"}}) {
    const StatusOr<Config> bad = ParseConfig(std::string(kMinimal) + yaml, "cfg.yaml");
    ASSERT_FALSE(bad.ok()) << yaml;
    EXPECT_NE(bad.status().message().find(place), std::string::npos) << bad.status().ToString();
  }
}

}  // namespace config_loader_test
}  // namespace chorus

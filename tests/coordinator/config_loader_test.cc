#include "coordinator/config_loader.h"

#include <gtest/gtest.h>

#include <filesystem>

#include "tests/testing/reference.h"

namespace chorus {
namespace {

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
      BadConfig{"BadEnum", "data: {train: a, test: b, target: y}\nmodel: {activation: swish}\n",
                  "model.activation: expected one of relu, tanh, gelu, found \"swish\""},
      BadConfig{"MinAboveMembers", "data: {train: a, test: b, target: y}\nensemble: {members: 2, min_members: 3}\n",
                  "ensemble.min_members"},
      BadConfig{"RankAboveSnapshots",
                "data: {train: a, test: b, target: y}\nensemble: {basin: {snapshots: 4, rank: 5}}\n",
                "ensemble.basin.rank: expected a rank (at most snapshots) in [2, 4]"},
      BadConfig{"PartsAboveBatch", "data: {train: a, test: b, target: y}\ntrain: {batch_size: 8, parts: 9}\n",
                "train.parts: expected a part count (at most batch_size) in [1, 8]"},
      BadConfig{"MissingTarget", "data: {train: a, test: b}\n", "data.target: required"},
      BadConfig{"MissingData", "run: {seed: 1}\n", "data: required"},
      BadConfig{"NotYaml", "data: [unclosed\n", "cfg.yaml:"},
      BadConfig{"BadRunName", "run: {name: ../x}\ndata: {train: a, test: b, target: y}\n",
                  "run.name: expected letters"}};
  for (const BadConfig& c : cases) {
    SCOPED_TRACE(c.name);
    StatusOr<Config> parsed = ParseConfig(c.yaml, "cfg.yaml");
    ASSERT_FALSE(parsed.ok());
    EXPECT_EQ(parsed.status().code(), Status::Code::kInvalidInput);
    EXPECT_NE(parsed.status().message().find(c.expected), std::string::npos) << parsed.status().message();
  }
}

}  // namespace
}  // namespace chorus

// `chorus rollback` (coordinator/rollback_command.h) on registries built through the Registry
// API from small synthetic bundles: walking back, --to, refusals that leave `current` alone.
#include <gtest/gtest.h>

#include <chrono>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "coordinator/registry.h"
#include "proto/bundle_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace rollback_test {

namespace fs = std::filesystem;
using nlohmann::json;

class RollbackTest : public ::testing::Test {
 protected:
  // A registry with three versions, promoted a second apart; current is the newest.
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-rollback") + "/registry";
    StatusOr<std::unique_ptr<Registry>> r = Registry::Open(dir_, {});
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    for (int i = 0; i < 3; ++i) {
      testing::SyntheticBundleSpec spec;
      spec.seed = static_cast<uint64_t>(i + 1);
      const std::string bytes = EncodeBundleFile(testing::SyntheticBundle(spec));
      const std::string sha = DecodeBundleFile(bytes, "synthetic").value().payload_sha256;
      const auto when = std::chrono::system_clock::from_time_t(1796181300 + i);
      ids_.push_back(r.value()->NewId(sha, when));
      ASSERT_TRUE(r.value()->AddVersion(ids_.back(), bytes, sha, {{"decision.json", "{}\n"}}).ok());
    }
    ASSERT_TRUE(r.value()->SwitchCurrent(ids_[2]).ok());
  }  // the registry's lock is released here, before any chorus process runs
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(fs::path(dir_).parent_path());
  }

  testing::CommandResult Rollback(const std::string& flags = "") {
    return testing::RunShell(testing::BinaryPath("chorus") + " rollback --registry " + dir_ + " " + flags, 60);
  }
  std::string Current() const {
    std::error_code ec;
    return fs::read_symlink(dir_ + "/current", ec).string();
  }
  std::vector<json> Records() const {
    std::vector<json> lines;
    std::istringstream in(testing::ReadTextFile(dir_ + "/rollbacks.jsonl"));
    for (std::string line; std::getline(in, line);) lines.push_back(json::parse(line));
    return lines;
  }

  std::string dir_;
  std::vector<std::string> ids_;  // oldest first
};

TEST_F(RollbackTest, EachRollbackGoesOneVersionFurtherBackAndIsRecorded) {
  testing::CommandResult r = Rollback();
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[1]);
  EXPECT_NE(r.output.find(ids_[1] + "\n"), std::string::npos) << r.output;  // the new current on stdout
  r = Rollback();
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[0]);
  // The oldest kept version: nothing earlier, exit 2, current untouched.
  r = Rollback();
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("no version older than current"), std::string::npos) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[0]);
  const std::vector<json> records = Records();
  ASSERT_EQ(records.size(), 2u);
  EXPECT_EQ(records[0]["from"], ids_[2]);
  EXPECT_EQ(records[0]["to"], ids_[1]);
  EXPECT_EQ(records[1]["from"], ids_[1]);
  EXPECT_EQ(records[1]["to"], ids_[0]);
  EXPECT_EQ(records[1]["time"].get<std::string>().size(), std::string("2026-12-01T23:17:03.512Z").size());
}

TEST_F(RollbackTest, AVersionRolledBackFromIsSkippedLater) {
  // Roll back from the newest (ids_[2]) to ids_[1], then a new promotion (ids_[3]) goes wrong
  // too: rolling it back returns to ids_[1], not to ids_[2], which was already rejected.
  ASSERT_EQ(Rollback().exit_code, 0);
  {
    StatusOr<std::unique_ptr<Registry>> r = Registry::Open(dir_, {});
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    testing::SyntheticBundleSpec spec;
    spec.seed = 9;
    const std::string bytes = EncodeBundleFile(testing::SyntheticBundle(spec));
    const std::string sha = DecodeBundleFile(bytes, "synthetic").value().payload_sha256;
    ids_.push_back(r.value()->NewId(sha, std::chrono::system_clock::from_time_t(1796181400)));
    ASSERT_TRUE(r.value()->AddVersion(ids_.back(), bytes, sha, {}).ok());
    ASSERT_TRUE(r.value()->SwitchCurrent(ids_.back()).ok());
  }
  const testing::CommandResult r = Rollback();
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[1]);
  // A record chorus did not write is refused with its place.
  testing::WriteTextFile(dir_ + "/rollbacks.jsonl", testing::ReadTextFile(dir_ + "/rollbacks.jsonl") + "oops\n");
  const testing::CommandResult bad = Rollback();
  EXPECT_EQ(bad.exit_code, 2) << bad.output;
  EXPECT_NE(bad.output.find("rollbacks.jsonl:3: expected {\"time\", \"from\", \"to\"}"), std::string::npos) << bad.output;
  EXPECT_EQ(Current(), "versions/" + ids_[1]);
}

TEST_F(RollbackTest, ToNamesAnyKeptVersionForwardOrBack) {
  testing::CommandResult r = Rollback("--to " + ids_[0]);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[0]);
  r = Rollback("--to " + ids_[2]);  // and forward again, e.g. after a false alarm
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[2]);
  r = Rollback("--to " + ids_[2]);  // already current: nothing to do, nothing recorded
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("already is current"), std::string::npos) << r.output;
  EXPECT_EQ(Records().size(), 2u);
}

TEST_F(RollbackTest, RefusalsLeaveCurrentUntouched) {
  // An unknown ID, with the kept versions named.
  testing::CommandResult r = Rollback("--to 20990101T000000.000Z-000000000000");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("no such version"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find(ids_[1]), std::string::npos) << r.output;
  // A target whose bundle no longer verifies (one payload byte flipped on disk).
  const std::string path = dir_ + "/versions/" + ids_[1] + "/bundle.chorus";
  std::string bytes = testing::ReadTextFile(path);
  bytes[bytes.size() / 2] = static_cast<char>(bytes[bytes.size() / 2] ^ 0x20);
  testing::WriteTextFile(path, bytes);
  r = Rollback();
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("not rolling back"), std::string::npos) << r.output;
  EXPECT_EQ(Current(), "versions/" + ids_[2]);
  EXPECT_FALSE(fs::exists(dir_ + "/rollbacks.jsonl"));
  // Not a registry: refused, and nothing created there.
  const std::string elsewhere = fs::path(dir_).parent_path().string() + "/not-a-registry";
  r = testing::RunShell(testing::BinaryPath("chorus") + " rollback --registry " + elsewhere, 60);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("not a registry"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(elsewhere));
}

}  // namespace rollback_test
}  // namespace chorus

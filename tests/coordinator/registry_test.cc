// The registry directory (coordinator/registry.h): version ids, verified copies, the `current`
// symlink, pruning, cleanup of interrupted promotions and the lock, on small synthetic bundles.
#include "coordinator/registry.h"

#include <gtest/gtest.h>

#include <atomic>
#include <chrono>
#include <filesystem>
#include <thread>

#include "proto/bundle_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace registry_test {

namespace fs = std::filesystem;

// 2026-12-02T03:15:00.250Z plus `seconds`.
std::chrono::system_clock::time_point Time(int seconds) {
  return std::chrono::system_clock::from_time_t(1796181300 + seconds) +
         std::chrono::milliseconds(250);
}

// A small bundle file and its payload checksum.
struct BundleBytes {
  std::string bytes;
  std::string sha256;
};

BundleBytes MakeBundle(uint64_t seed) {
  testing::SyntheticBundleSpec spec;
  spec.seed = seed;
  BundleBytes b;
  b.bytes = EncodeBundleFile(testing::SyntheticBundle(spec));
  b.sha256 = DecodeBundleFile(b.bytes, "synthetic").value().payload_sha256;
  return b;
}

class RegistryTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("chorus-registry") + "/registry"; }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(fs::path(dir_).parent_path());
  }

  std::unique_ptr<Registry> Open() {
    StatusOr<std::unique_ptr<Registry>> r = Registry::Open(dir_, {});
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    return r.ok() ? std::move(r).value() : nullptr;
  }

  // Adds a version made at Time(offset); returns its id.
  static std::string Add(Registry& r, const BundleBytes& b, int offset) {
    const std::string id = r.NewId(b.sha256, Time(offset));
    const Status st = r.AddVersion(id, b.bytes, b.sha256, {{"decision.json", "{}\n"}});
    EXPECT_TRUE(st.ok()) << st.ToString();
    return id;
  }

  std::string dir_;
};

TEST_F(RegistryTest, EmptyRegistryHasNoCurrent) {
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  const auto current = r->Current();
  ASSERT_TRUE(current.ok()) << current.status().ToString();
  EXPECT_FALSE(current.value().has_value());
  EXPECT_TRUE(fs::is_directory(dir_ + "/versions"));
  EXPECT_TRUE(fs::is_directory(dir_ + "/refused"));
}

TEST_F(RegistryTest, IdsSortByTimeAndNeverRepeat) {
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  const BundleBytes b = MakeBundle(1);
  const std::string id = Add(*r, b, 0);
  EXPECT_EQ(id, "20261202T031500.250Z-" + b.sha256.substr(0, 12));
  EXPECT_EQ(r->NewId(b.sha256, Time(0)), id + "-2");
  ASSERT_TRUE(r->RecordRefusal(id + "-2", "{}\n").ok());
  EXPECT_EQ(r->NewId(b.sha256, Time(0)), id + "-3");
  EXPECT_LT(id, r->NewId(b.sha256, Time(1)));
}

TEST_F(RegistryTest, SwitchPointsCurrentAtACompleteVerifiedCopy) {
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  const BundleBytes a = MakeBundle(1), b = MakeBundle(2);
  const std::string first = Add(*r, a, 0), second = Add(*r, b, 1);
  ASSERT_TRUE(r->SwitchCurrent(first).ok());
  ASSERT_TRUE(r->SwitchCurrent(second).ok());
  EXPECT_EQ(fs::read_symlink(dir_ + "/current").string(), "versions/" + second);
  EXPECT_EQ(r->Current().value(), second);
  EXPECT_EQ(testing::ReadTextFile(r->BundlePath(second)), b.bytes);
  EXPECT_EQ(testing::ReadTextFile(r->VersionDir(second) + "/decision.json"), "{}\n");
  for (const auto& entry : fs::directory_iterator(dir_)) {  // no temporary links left
    EXPECT_EQ(entry.path().filename().string().rfind("current.tmp", 0), std::string::npos);
  }
}

TEST_F(RegistryTest, CopyThatDoesNotVerifyIsNotAdded) {
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  const BundleBytes b = MakeBundle(1);
  const std::string id = r->NewId(b.sha256, Time(0));
  const Status st = r->AddVersion(id, b.bytes, std::string(64, '0'), {});
  EXPECT_EQ(st.code(), Status::Code::kInternal) << st.ToString();
  EXPECT_TRUE(fs::is_empty(dir_ + "/versions"));
}

TEST_F(RegistryTest, PruneKeepsTheNewestAndTheCurrent) {
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  std::vector<std::string> ids;
  for (int i = 0; i < 5; ++i) ids.push_back(Add(*r, MakeBundle(static_cast<uint64_t>(i)), i));
  for (int i = 0; i < 4; ++i) ASSERT_TRUE(r->RecordRefusal("r" + std::to_string(i), "{}").ok());
  ASSERT_TRUE(r->SwitchCurrent(ids[0]).ok());  // rolled back to the oldest
  const auto removed = r->Prune(2);
  ASSERT_TRUE(removed.ok()) << removed.status().ToString();
  EXPECT_EQ(removed.value(), (std::vector<std::string>{ids[1], ids[2]}));
  for (int i = 0; i < 5; ++i) EXPECT_EQ(fs::exists(r->VersionDir(ids[i])), i == 0 || i >= 3);
  EXPECT_FALSE(fs::exists(dir_ + "/refused/r1.json"));
  EXPECT_TRUE(fs::exists(dir_ + "/refused/r2.json"));
  EXPECT_TRUE(fs::exists(dir_ + "/refused/r3.json"));
  EXPECT_EQ(r->Current().value(), ids[0]);
}

TEST_F(RegistryTest, OpenRemovesLeftoversOfInterruptedPromotions) {
  const BundleBytes b = MakeBundle(1);
  std::string id;
  {
    const auto r = Open();
    ASSERT_NE(r, nullptr);
    id = Add(*r, b, 0);
    ASSERT_TRUE(r->SwitchCurrent(id).ok());
  }
  fs::create_directories(dir_ + "/versions/.staging-x-123");
  testing::WriteTextFile(dir_ + "/versions/.staging-x-123/bundle.chorus", "partial");
  fs::create_symlink("versions/nothing", dir_ + "/current.tmp-123");
  const auto r = Open();
  ASSERT_NE(r, nullptr);
  EXPECT_FALSE(fs::exists(dir_ + "/versions/.staging-x-123"));
  EXPECT_FALSE(fs::is_symlink(dir_ + "/current.tmp-123"));
  EXPECT_EQ(r->Current().value(), id);
}

TEST_F(RegistryTest, CurrentMustLinkToAVersionWithABundle) {
  ASSERT_NE(Open(), nullptr);
  const std::vector<std::string> targets = {"../elsewhere", "versions/../x", "versions/missing",
                                            "versions/"};
  for (const std::string& target : targets) {
    SCOPED_TRACE(target);
    fs::remove(dir_ + "/current");
    fs::create_symlink(target, dir_ + "/current");
    const auto r = Open();
    ASSERT_NE(r, nullptr);
    EXPECT_EQ(r->Current().status().code(), Status::Code::kInvalidInput);
  }
  fs::remove(dir_ + "/current");
  testing::WriteTextFile(dir_ + "/current", "versions/x\n");  // a file, not a link
  EXPECT_EQ(Open()->Current().status().code(), Status::Code::kInvalidInput);
}

TEST_F(RegistryTest, SecondOpenWaitsForTheLock) {
  auto first = Open();
  ASSERT_NE(first, nullptr);
  std::atomic<bool> waited{false}, opened{false};
  std::thread second([&] {
    auto r = Registry::Open(dir_, [&] { waited = true; });
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    opened = true;
  });
  EXPECT_TRUE(testing::WaitFor([&] { return waited.load(); }, 10));
  std::this_thread::sleep_for(std::chrono::milliseconds(100));
  EXPECT_FALSE(opened.load());
  first.reset();  // releases the lock
  EXPECT_TRUE(testing::WaitFor([&] { return opened.load(); }, 10));
  second.join();
}

}  // namespace registry_test
}  // namespace chorus

// Writes that meet a full file system (common/file_util.h): they wait, within a bound, for space
// to come back, then finish whole; when it does not come back they fail naming the file and leave
// the old bytes exactly as they were (no torn event line). /dev/full answers every write with
// ENOSPC; the rest uses a small tmpfs the test mounts itself (root only, skipped otherwise), so
// that a write can be cut short for real, as the chaos soak (scripts/chaos_soak.py) does it.
#include <gtest/gtest.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <string>
#include <thread>

#include "common/file_util.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace full_disk_test {

namespace fs = std::filesystem;

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// Writes zeros to `path` until the file system says it is full.
void FillUp(const std::string& path) {
  std::ofstream out(path, std::ios::binary);
  const std::string block(4096, '\0');
  while (out.write(block.data(), static_cast<std::streamsize>(block.size())) && out.flush()) {
  }
}

TEST(FullDiskTest, ADeviceThatStaysFullFailsAfterThePatienceNamingTheFile) {
  const auto start = std::chrono::steady_clock::now();
  const Status st = AppendLine("/dev/full", "{\"event\": \"x\"}", 0.4);
  EXPECT_GE(SecondsSince(start), 0.4) << "it waited for space";
  EXPECT_LT(SecondsSince(start), 5.0);
  ASSERT_EQ(st.code(), Status::Code::kIo);
  EXPECT_NE(st.message().find("/dev/full: write failed: No space left on device"), std::string::npos)
      << st.message();
  // Errors that waiting cannot cure are not waited for.
  const auto quick = std::chrono::steady_clock::now();
  EXPECT_FALSE(AppendLine("/no-such-dir/events.jsonl", "x", 30).ok());
  EXPECT_LT(SecondsSince(quick), 1.0);
}

// A 64 KiB tmpfs mounted on a fresh directory, unmounted at the end.
class SmallFileSystemTest : public ::testing::Test {
 protected:
  void SetUp() override {
    if (geteuid() != 0) GTEST_SKIP() << "mounting a tmpfs needs root; running as uid " << geteuid();
    dir_ = testing::MakeTempDir("chorus-full-disk");
    const auto r = testing::RunShell("mount -t tmpfs -o size=64k tmpfs " + dir_);
    if (r.exit_code != 0) GTEST_SKIP() << "cannot mount a tmpfs here: " << r.output;
    mounted_ = true;
  }
  void TearDown() override {
    if (mounted_) testing::RunShell("umount -l " + dir_);
    if (!dir_.empty()) fs::remove_all(dir_);
  }
  std::string dir_;
  bool mounted_ = false;
};

TEST_F(SmallFileSystemTest, AMomentOfFullDiskCostsNothing) {
  const std::string events = dir_ + "/events.jsonl";
  ASSERT_TRUE(AppendLine(events, "{\"n\": 1}").ok());
  FillUp(dir_ + "/filler");
  const std::string line(10000, 'a');
  const std::string blob(20000, 'b');
  // Space comes back 0.5 s later (the filler is removed), well within the patience.
  std::thread freer([&] {
    std::this_thread::sleep_for(std::chrono::milliseconds(500));
    fs::remove(dir_ + "/filler");
  });
  const Status appended = AppendLine(events, line, 10);
  const Status written = WriteFileAtomic(dir_ + "/report.json", blob, 10);
  freer.join();
  ASSERT_TRUE(appended.ok()) << appended.ToString();
  ASSERT_TRUE(written.ok()) << written.ToString();
  EXPECT_EQ(testing::ReadTextFile(events), "{\"n\": 1}\n" + line + "\n");
  EXPECT_TRUE(testing::ReadTextFile(dir_ + "/report.json") == blob);
}

TEST_F(SmallFileSystemTest, SpaceThatNeverComesBackLeavesNoTornLineAndNoTemporaryFile) {
  const std::string events = dir_ + "/events.jsonl";
  ASSERT_TRUE(AppendLine(events, "{\"n\": 1}").ok());
  // Full except for one 4 KiB page, so that a longer line is written in part before ENOSPC.
  testing::WriteTextFile(dir_ + "/one-page", std::string(4096, 'p'));
  FillUp(dir_ + "/filler");
  fs::remove(dir_ + "/one-page");
  const Status appended = AppendLine(events, std::string(12000, 'a'), 0.3);
  ASSERT_EQ(appended.code(), Status::Code::kIo);
  EXPECT_NE(appended.message().find("No space left on device"), std::string::npos) << appended.message();
  EXPECT_EQ(testing::ReadTextFile(events), "{\"n\": 1}\n") << "the cut-short line was cut back off";
  // The next event after space comes back starts on its own line.
  fs::remove(dir_ + "/filler");
  ASSERT_TRUE(AppendLine(events, "{\"n\": 2}").ok());
  EXPECT_EQ(testing::ReadTextFile(events), "{\"n\": 1}\n{\"n\": 2}\n");

  FillUp(dir_ + "/filler");
  const Status written = WriteFileAtomic(dir_ + "/report.json", std::string(30000, 'b'), 0.3);
  EXPECT_EQ(written.code(), Status::Code::kIo);
  EXPECT_FALSE(fs::exists(dir_ + "/report.json"));
  for (const auto& entry : fs::directory_iterator(dir_)) {
    EXPECT_EQ(entry.path().filename().string().find(".tmp-"), std::string::npos) << entry.path();
  }
}

}  // namespace full_disk_test
}  // namespace chorus

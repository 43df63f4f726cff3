// coordinator/run_directory.h: symbolic links planted in a run directory are refused, never
// followed: on resume, when a job's directory is made, and by the event log.
#include "coordinator/run_directory.h"

#include <gtest/gtest.h>

#include <filesystem>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace run_directory_test {

namespace fs = std::filesystem;

class RunDirectoryTest : public ::testing::Test {
 protected:
  void SetUp() override {
    root_ = testing::MakeTempDir("chorus-run-dir");
    elsewhere_ = root_ + "/elsewhere";
    fs::create_directories(elsewhere_);
    StatusOr<RunDirectory> dir = RunDirectory::Create(root_ + "/runs", "links");
    ASSERT_TRUE(dir.ok()) << dir.status().ToString();
    run_ = dir.value().path();
    testing::WriteTextFile(run_ + "/config.yaml", "run: {name: links}\n");
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(root_);
  }
  std::string root_, elsewhere_, run_;
};

TEST_F(RunDirectoryTest, ResumeRefusesAPlantedLinkNamingIt) {
  fs::create_directory_symlink(elsewhere_, run_ + "/jobs/3");
  const StatusOr<RunDirectory> opened = RunDirectory::Open(run_);
  ASSERT_EQ(opened.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(opened.status().message().find(run_ + "/jobs/3: is a symbolic link"), std::string::npos)
      << opened.status().message();
  fs::remove(run_ + "/jobs/3");
  EXPECT_TRUE(RunDirectory::Open(run_).ok()) << "the same directory without the link";
}

TEST_F(RunDirectoryTest, AJobDirectoryThatIsALinkIsRefusedAndNothingIsWrittenThere) {
  StatusOr<RunDirectory> dir = RunDirectory::Open(run_);
  ASSERT_TRUE(dir.ok());
  fs::create_directory_symlink(elsewhere_, run_ + "/jobs/fold-0-1");
  EXPECT_EQ(dir.value().JobDir("fold-0-1").status().code(), Status::Code::kInvalidInput);
  EXPECT_TRUE(fs::is_empty(elsewhere_));
  EXPECT_TRUE(dir.value().JobDir("fold-0-2").ok());
}

TEST_F(RunDirectoryTest, TheEventLogDoesNotFollowALink) {
  StatusOr<RunDirectory> dir = RunDirectory::Open(run_);
  ASSERT_TRUE(dir.ok());
  const std::string target = elsewhere_ + "/victim.txt";
  testing::WriteTextFile(target, "keep me\n");
  fs::create_symlink(target, run_ + "/events.jsonl");
  EXPECT_FALSE(dir.value().LogEvent("stage_started").ok());
  EXPECT_EQ(testing::ReadTextFile(target), "keep me\n");
}

}  // namespace run_directory_test
}  // namespace chorus

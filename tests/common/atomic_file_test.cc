// Crash-safe writes (common/atomic_file.h, WriteFileAtomic in common/file_util.h): the path holds
// the old file or the whole new one, and no temporary file is left behind either way.
#include "common/atomic_file.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "common/file_util.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace atomic_file_test {

namespace fs = std::filesystem;

// The names of the entries of `dir`, sorted.
std::vector<std::string> Entries(const std::string& dir) {
  std::vector<std::string> names;
  for (const auto& entry : fs::directory_iterator(dir)) names.push_back(entry.path().filename().string());
  std::sort(names.begin(), names.end());
  return names;
}

class AtomicFileTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("atomic_file_test"); }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }
  std::string dir_;
};

TEST_F(AtomicFileTest, CommitReplacesTheFileAndTheOldOneStaysUntilThen) {
  const std::string path = dir_ + "/state.json";
  testing::WriteTextFile(path, "old contents\n");
  StatusOr<std::unique_ptr<AtomicFile>> file = AtomicFile::Create(path);
  ASSERT_TRUE(file.ok()) << file.status().ToString();
  ASSERT_TRUE(file.value()->Append("new ").ok());
  ASSERT_TRUE(file.value()->Append("contents, longer than before\n").ok());
  // Before Commit the path still holds the old file; the new bytes sit in a temporary beside it.
  EXPECT_EQ(testing::ReadTextFile(path), "old contents\n");
  const std::vector<std::string> during = Entries(dir_);
  ASSERT_EQ(during.size(), 2u);
  EXPECT_EQ(during[0], "state.json");
  EXPECT_EQ(during[1].rfind("state.json.tmp-", 0), 0u) << during[1];
  const Status committed = file.value()->Commit();
  ASSERT_TRUE(committed.ok()) << committed.ToString();
  EXPECT_EQ(testing::ReadTextFile(path), "new contents, longer than before\n");
  file.value().reset();  // destroying a committed file removes nothing
  EXPECT_EQ(testing::ReadTextFile(path), "new contents, longer than before\n");
  EXPECT_EQ(Entries(dir_), (std::vector<std::string>{"state.json"}));
}

TEST_F(AtomicFileTest, WithoutCommitTheOldFileIsUntouchedAndNoTemporaryFileRemains) {
  const std::string path = dir_ + "/state.json";
  testing::WriteTextFile(path, "old contents\n");
  {
    StatusOr<std::unique_ptr<AtomicFile>> file = AtomicFile::Create(path);
    ASSERT_TRUE(file.ok()) << file.status().ToString();
    ASSERT_TRUE(file.value()->Append("half a new fi").ok());
    EXPECT_EQ(Entries(dir_).size(), 2u) << "the temporary file exists while writing";
  }  // an early return: destroyed without Commit
  EXPECT_EQ(testing::ReadTextFile(path), "old contents\n");
  EXPECT_EQ(Entries(dir_), (std::vector<std::string>{"state.json"}));
  // The same when there was no old file: nothing appears at the path.
  const std::string fresh = dir_ + "/fresh.json";
  { ASSERT_TRUE(AtomicFile::Create(fresh).ok()); }
  EXPECT_FALSE(fs::exists(fresh));
  EXPECT_EQ(Entries(dir_), (std::vector<std::string>{"state.json"}));
}

TEST_F(AtomicFileTest, CreateFailsWithIoNamingThePathWhenItsDirectoryCannotHoldIt) {
  const std::string missing_dir = dir_ + "/no-such-dir/out.json";
  StatusOr<std::unique_ptr<AtomicFile>> file = AtomicFile::Create(missing_dir);
  ASSERT_FALSE(file.ok());
  EXPECT_EQ(file.status().code(), Status::Code::kIo);
  // The message names the temporary file, which starts with the path.
  EXPECT_NE(file.status().message().find(missing_dir + ".tmp-"), std::string::npos)
      << file.status().message();
  EXPECT_NE(file.status().message().find("cannot create"), std::string::npos) << file.status().message();

  const std::string regular = dir_ + "/plain-file";
  testing::WriteTextFile(regular, "x");
  const std::string under_file = regular + "/out.json";
  const Status written = WriteFileAtomic(under_file, "contents");
  EXPECT_EQ(written.code(), Status::Code::kIo);
  EXPECT_NE(written.message().find(under_file), std::string::npos) << written.message();
  EXPECT_EQ(testing::ReadTextFile(regular), "x");
  EXPECT_EQ(Entries(dir_), (std::vector<std::string>{"plain-file"}));
}

TEST_F(AtomicFileTest, WriteFileAtomicWritesTheWholeContents) {
  const std::string path = dir_ + "/blob.bin";
  std::string contents;
  for (int i = 0; i < 300000; ++i) contents += static_cast<char>((i * 31) % 256);  // NUL bytes too
  ASSERT_TRUE(WriteFileAtomic(path, contents).ok());
  EXPECT_EQ(fs::file_size(path), contents.size());
  EXPECT_TRUE(ReadFileToString(path).value() == contents);
  // Overwriting with something shorter leaves exactly the new contents, no tail of the old.
  ASSERT_TRUE(WriteFileAtomic(path, "short").ok());
  EXPECT_EQ(testing::ReadTextFile(path), "short");
  ASSERT_TRUE(WriteFileAtomic(path, "").ok());
  EXPECT_EQ(fs::file_size(path), 0u);
  EXPECT_EQ(Entries(dir_), (std::vector<std::string>{"blob.bin"}));
}

}  // namespace atomic_file_test
}  // namespace chorus

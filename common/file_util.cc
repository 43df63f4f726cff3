#include "common/file_util.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <memory>
#include <sstream>
#include <thread>

#include "common/atomic_file.h"
#include "common/log_format.h"

namespace chorus {
namespace {

bool NoSpace(int err) { return err == ENOSPC || err == EDQUOT; }

// Writes all of `contents`; on failure sets *err to the errno.
Status WriteAll(int fd, const std::string& contents, const std::string& path, int* err) {
  size_t done = 0;
  while (done < contents.size()) {
    const ssize_t n = ::write(fd, contents.data() + done, contents.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      *err = errno;
      return Status::Io(path + ": write failed: " + ErrnoText());
    }
    done += static_cast<size_t>(n);
  }
  return Status::Ok();
}

// The wait for a full file system to get space again: Again() sleeps (0.1 s, doubling to 1 s)
// and says true while the patience lasts; the first call warns on stderr.
class DiskFullWait {
 public:
  DiskFullWait(std::string path, double patience_seconds)
      : path_(std::move(path)), patience_(patience_seconds), start_(std::chrono::steady_clock::now()) {}

  bool Again() {
    const double waited =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
    if (waited >= patience_) return false;
    if (pause_ == 0) {
      char seconds[32];
      std::snprintf(seconds, sizeof seconds, "%.3g", patience_);
      LogLine(stderr, LogLevel::kWarning,
              path_ + ": the file system is full; waiting up to " + seconds + " s for space",
              {{"path", path_}, {"patience_seconds", patience_}});
      pause_ = 0.1;
    }
    std::this_thread::sleep_for(std::chrono::duration<double>(std::min(pause_, patience_ - waited)));
    pause_ = std::min(2 * pause_, 1.0);
    return true;
  }

 private:
  const std::string path_;
  const double patience_;
  const std::chrono::steady_clock::time_point start_;
  double pause_ = 0;
};

}  // namespace

StatusOr<std::string> ReadFileToString(const std::string& path, int64_t max_bytes) {
  std::error_code ec;
  const auto size = std::filesystem::file_size(path, ec);
  if (ec) return Status::InvalidInput(path + ": cannot read file: " + ec.message());
  if (static_cast<int64_t>(size) > max_bytes) {
    return Status::InvalidInput(path + ": file is " + std::to_string(size) +
                                " bytes, more than the limit of " + std::to_string(max_bytes));
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidInput(path + ": cannot open file");
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

Status WriteFileAtomic(const std::string& path, const std::string& contents, double disk_full_patience) {
  DiskFullWait wait(path, disk_full_patience);
  while (true) {
    CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<AtomicFile> file, AtomicFile::Create(path));
    Status st = file->Append(contents);
    if (st.ok()) st = file->Commit();
    if (st.ok() || !file->FailedForSpace() || !wait.Again()) return st;
  }
}

Status AppendLine(const std::string& path, const std::string& line, double disk_full_patience) {
  const std::string text = line + "\n";
  DiskFullWait wait(path, disk_full_patience);
  while (true) {
    const int fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC | O_NOFOLLOW, 0644);
    if (fd < 0) return Status::Io(path + ": cannot open for append: " + ErrnoText());
    struct stat before;
    if (::fstat(fd, &before) != 0) {
      const Status st = Status::Io(path + ": cannot stat: " + ErrnoText());
      ::close(fd);
      return st;
    }
    int err = 0;
    const Status st = WriteAll(fd, text, path, &err);
    // A line cut short is cut back off (shrinking a file needs no space).
    if (!st.ok() && S_ISREG(before.st_mode)) (void)::ftruncate(fd, before.st_size);
    ::close(fd);
    if (st.ok() || !NoSpace(err) || !wait.Again()) return st;
  }
}

Status MakeDirectories(const std::string& path) {
  std::error_code ec;
  std::filesystem::create_directories(path, ec);
  if (ec) return Status::Io(path + ": cannot create directory: " + ec.message());
  return Status::Ok();
}

}  // namespace chorus

#include "common/file_util.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <memory>
#include <sstream>

#include "common/atomic_file.h"

namespace chorus {
namespace {

std::string Errno() { return std::strerror(errno); }

Status WriteAll(int fd, const std::string& contents, const std::string& path) {
  size_t done = 0;
  while (done < contents.size()) {
    const ssize_t n = ::write(fd, contents.data() + done, contents.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) return Status::Io(path + ": write failed: " + Errno());
    done += static_cast<size_t>(n);
  }
  return Status::Ok();
}

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

Status WriteFileAtomic(const std::string& path, const std::string& contents) {
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<AtomicFile> file, AtomicFile::Create(path));
  CHORUS_RETURN_IF_ERROR(file->Append(contents));
  return file->Commit();
}

Status AppendLine(const std::string& path, const std::string& line) {
  const int fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC | O_NOFOLLOW, 0644);
  if (fd < 0) return Status::Io(path + ": cannot open for append: " + Errno());
  Status st = WriteAll(fd, line + "\n", path);
  ::close(fd);
  return st;
}

Status MakeDirectories(const std::string& path) {
  std::error_code ec;
  std::filesystem::create_directories(path, ec);
  if (ec) return Status::Io(path + ": cannot create directory: " + ec.message());
  return Status::Ok();
}

}  // namespace chorus

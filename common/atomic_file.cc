#include "common/atomic_file.h"

#include <unistd.h>

#include <atomic>
#include <cerrno>

namespace chorus {

StatusOr<std::unique_ptr<AtomicFile>> AtomicFile::Create(const std::string& path) {
  static std::atomic<uint64_t> counter{0};
  const std::string temp =
      path + ".tmp-" + std::to_string(::getpid()) + "-" + std::to_string(counter++);
  std::FILE* file = std::fopen(temp.c_str(), "wbx");
  if (file == nullptr) return Status::Io(temp + ": cannot create: " + ErrnoText());
  return std::unique_ptr<AtomicFile>(new AtomicFile(file, path, temp));
}

AtomicFile::~AtomicFile() {
  if (committed_) return;
  if (file_ != nullptr) std::fclose(file_);
  std::remove(temp_.c_str());
}

Status AtomicFile::Append(std::string_view bytes) {
  if (std::fwrite(bytes.data(), 1, bytes.size(), file_) != bytes.size()) {
    failure_errno_ = errno;
    return Status::Io(temp_ + ": write failed: " + ErrnoText());
  }
  return Status::Ok();
}

Status AtomicFile::Commit() {
  Status st;
  if (std::fflush(file_) != 0 || ::fsync(::fileno(file_)) != 0) {
    failure_errno_ = errno;
    st = Status::Io(temp_ + ": flush failed: " + ErrnoText());
  }
  if (std::fclose(file_) != 0 && st.ok()) {
    failure_errno_ = errno;
    st = Status::Io(temp_ + ": close failed: " + ErrnoText());
  }
  file_ = nullptr;
  if (st.ok() && std::rename(temp_.c_str(), path_.c_str()) != 0) {
    st = Status::Io(path_ + ": rename failed: " + ErrnoText());
  }
  committed_ = st.ok();
  return st;
}

bool AtomicFile::FailedForSpace() const { return failure_errno_ == ENOSPC || failure_errno_ == EDQUOT; }

}  // namespace chorus

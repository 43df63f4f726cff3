// A file written in pieces that appears at its path only once complete: bytes go to a temporary
// file beside it (PATH.tmp-PID-N), and Commit flushes that to disk and renames it over PATH, so a
// reader sees the old file or the whole new one, never a part. Without Commit (an error, an
// early return) the destructor removes the temporary file and PATH is untouched.
// Thread safety: an AtomicFile is used by one thread at a time.
#pragma once

#include <cstdio>
#include <memory>
#include <string>
#include <string_view>

#include "common/status.h"

namespace chorus {

class AtomicFile {
 public:
  // Creates the temporary file. Errors: kIo naming it.
  static StatusOr<std::unique_ptr<AtomicFile>> Create(const std::string& path);
  ~AtomicFile();
  AtomicFile(const AtomicFile&) = delete;
  AtomicFile& operator=(const AtomicFile&) = delete;

  // Appends bytes (buffered). Errors: kIo naming the temporary file.
  Status Append(std::string_view bytes);

  // Flushes, fsyncs, closes and renames over the path. Call at most once; errors are kIo and
  // leave the path untouched.
  Status Commit();

  // True when the last failed Append or Commit failed because the file system is full (ENOSPC,
  // or EDQUOT: the user's quota), a condition that may pass.
  bool FailedForSpace() const;

 private:
  AtomicFile(std::FILE* file, std::string path, std::string temp)
      : file_(file), path_(std::move(path)), temp_(std::move(temp)) {}

  std::FILE* file_;
  std::string path_;
  std::string temp_;
  bool committed_ = false;
  int failure_errno_ = 0;  // errno of the last failed Append or Commit
};

}  // namespace chorus

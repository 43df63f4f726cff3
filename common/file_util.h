// Whole-file reads and crash-safe writes. Thread safety: reentrant; concurrent writers to the
// same path each leave a complete file (the last rename wins).
#pragma once

#include <cstdint>
#include <string>

#include "common/status.h"

namespace chorus {

// Reads a whole file; a missing or unreadable file is kInvalidInput naming the path. Files larger
// than max_bytes are refused before reading.
StatusOr<std::string> ReadFileToString(const std::string& path, int64_t max_bytes = int64_t{1} << 33);

// Writes `contents` through AtomicFile (common/atomic_file.h): a temporary file, flushed to disk,
// then renamed over `path`, so a reader sees the old file or the new one, never half of one.
// Errors are kIo naming the path.
Status WriteFileAtomic(const std::string& path, const std::string& contents);

// Appends one line (a '\n' is added) and flushes; for event logs. A symbolic link at `path` is
// not followed: it is an error, so a planted link cannot redirect the log. Errors are kIo.
Status AppendLine(const std::string& path, const std::string& line);

// mkdir -p. Errors are kIo naming the path.
Status MakeDirectories(const std::string& path);

}  // namespace chorus

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

// How long a write waits for a full file system (ENOSPC, EDQUOT) to get space again before it
// fails: a moment of full disk (another job's temporary files, a log burst) should not cost a
// run its work. While waiting, the write is tried again every 0.1-1 s, and one warning naming
// the file goes to stderr.
inline constexpr double kDiskFullPatienceSeconds = 60;

// Writes `contents` through AtomicFile (common/atomic_file.h): a temporary file, flushed to disk,
// then renamed over `path`, so a reader sees the old file or the new one, never half of one.
// Waits up to `disk_full_patience` seconds for space. Errors are kIo naming the path.
Status WriteFileAtomic(const std::string& path, const std::string& contents,
                       double disk_full_patience = kDiskFullPatienceSeconds);

// Appends one line (a '\n' is added) and flushes; for event logs. The line is added whole or not
// at all: a write cut short (a full disk) is cut back off, so no torn line is left for the next
// one to run into. Waits up to `disk_full_patience` seconds for space. A symbolic link at `path`
// is not followed: it is an error, so a planted link cannot redirect the log. Errors are kIo.
// Thread safety: concurrent appends to one file must be serialised by the caller.
Status AppendLine(const std::string& path, const std::string& line,
                  double disk_full_patience = kDiskFullPatienceSeconds);

// mkdir -p. Errors are kIo naming the path.
Status MakeDirectories(const std::string& path);

}  // namespace chorus

#include "common/status.h"

#include <cerrno>
#include <cstring>

namespace chorus {

std::string Status::ToString() const {
  switch (code_) {
    case Code::kOk: return "ok";
    case Code::kInvalidInput: return "invalid input: " + message_;
    case Code::kDiverged: return "diverged: " + message_;
    case Code::kRefused: return "refused: " + message_;
    case Code::kIo: return "i/o error: " + message_;
    case Code::kCancelled: return "cancelled: " + message_;
    case Code::kUnavailable: return "unavailable: " + message_;
    case Code::kInternal: return "internal error: " + message_;
  }
  return message_;
}

int Status::ExitCode() const {
  switch (code_) {
    case Code::kOk: return 0;
    case Code::kInvalidInput: return 2;
    case Code::kRefused: return 3;
    default: return 1;
  }
}

std::string ErrnoText() { return std::strerror(errno); }

}  // namespace chorus

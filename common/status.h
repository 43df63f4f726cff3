// Status and StatusOr: how chorus carries a failure and its context instead of throwing.
// A Status is either ok or a code plus a message that names the place (file:line:column, field).
// Thread safety: values; safe to copy between threads, no shared state.
#pragma once

#include <optional>
#include <string>
#include <utility>

namespace chorus {

class Status {
 public:
  // kInvalidInput: the user's file, config or flag is wrong (exit code 2).
  // kDiverged: training produced NaN/inf (the member fails, the run may go on).
  // kRefused: a gate or a minimum-count rule said no (exit code 3).
  // kIo: the operating system refused a read or write. kCancelled: stopped on request.
  // kUnavailable: a peer (coordinator, worker) could not be reached. kInternal: a bug.
  enum class Code { kOk, kInvalidInput, kDiverged, kRefused, kIo, kCancelled, kUnavailable, kInternal };

  Status() = default;
  static Status Ok() { return Status(); }
  static Status InvalidInput(std::string msg) { return Status(Code::kInvalidInput, std::move(msg)); }
  static Status Diverged(std::string msg) { return Status(Code::kDiverged, std::move(msg)); }
  static Status Refused(std::string msg) { return Status(Code::kRefused, std::move(msg)); }
  static Status Io(std::string msg) { return Status(Code::kIo, std::move(msg)); }
  static Status Cancelled(std::string msg) { return Status(Code::kCancelled, std::move(msg)); }
  static Status Unavailable(std::string msg) { return Status(Code::kUnavailable, std::move(msg)); }
  static Status Internal(std::string msg) { return Status(Code::kInternal, std::move(msg)); }

  bool ok() const { return code_ == Code::kOk; }
  Code code() const { return code_; }
  const std::string& message() const { return message_; }

  // Returns a copy whose message is "context: message"; ok stays ok.
  Status WithContext(const std::string& context) const {
    if (ok()) return *this;
    return Status(code_, context + ": " + message_);
  }

  // "invalid input: ..." etc., for logs and terminal output.
  std::string ToString() const;

  // The process exit code (docs/design.md): 0 ok, 2 bad input, 3 refused, 1 anything else.
  int ExitCode() const;

 private:
  Status(Code code, std::string msg) : code_(code), message_(std::move(msg)) {}
  Code code_ = Code::kOk;
  std::string message_;
};

// Either a value or a non-ok Status. Accessing value() of a failed StatusOr is a bug.
template <typename T>
class StatusOr {
 public:
  StatusOr(Status status) : status_(std::move(status)) {}  // NOLINT: implicit by design
  StatusOr(T value) : value_(std::move(value)) {}          // NOLINT: implicit by design

  bool ok() const { return status_.ok(); }
  const Status& status() const { return status_; }
  T& value() & { return *value_; }
  const T& value() const& { return *value_; }
  T&& value() && { return std::move(*value_); }

 private:
  Status status_;
  std::optional<T> value_;
};

// The C library's text for the current errno (strerror), for an I/O error's message. Call it
// right after the failing call, before anything else can change errno.
std::string ErrnoText();

}  // namespace chorus

// Returns early from the calling function with the status of `expr` if it is not ok.
#define CHORUS_RETURN_IF_ERROR(expr)            \
  do {                                          \
    ::chorus::Status chorus_status_ = (expr);   \
    if (!chorus_status_.ok()) return chorus_status_; \
  } while (0)

#define CHORUS_CONCAT_INNER_(a, b) a##b
#define CHORUS_CONCAT_(a, b) CHORUS_CONCAT_INNER_(a, b)
// Declares `lhs` from the value of a StatusOr expression, or returns its status.
#define CHORUS_ASSIGN_OR_RETURN(lhs, expr) \
  CHORUS_ASSIGN_OR_RETURN_IMPL_(CHORUS_CONCAT_(chorus_or_, __LINE__), lhs, expr)
#define CHORUS_ASSIGN_OR_RETURN_IMPL_(tmp, lhs, expr) \
  auto tmp = (expr);                                  \
  if (!tmp.ok()) return tmp.status();                 \
  lhs = std::move(tmp).value()

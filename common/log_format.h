// Log lines of the long-running commands (`chorus run`, `chorus-worker`) on stderr: plain text
// for people (the default), or, with `--log-format json`, JSON Lines for log collectors (journald,
// Kubernetes, Slurm output files): one object per line,
//   {"time": "2026-12-01T23:17:03.512Z", "level": "info", "msg": "the text line", FIELD: VALUE...}
// "time" is UTC (RFC 3339, milliseconds), "level" is info | warning | error, "msg" is exactly the
// line text mode prints, and the fields are machine-readable extras (ignored in text mode).
// Strings are escaped as JSON; bytes that are not UTF-8 become U+FFFD.
// Thread safety: LogLine and LogPrintf may be called from any thread (each line is one write);
// SetLogFormat must be called once, before other threads start.
#pragma once

#include <chrono>
#include <cstdio>
#include <initializer_list>
#include <string>
#include <string_view>
#include <utility>
#include <type_traits>

namespace chorus {

enum class LogFormat { kText, kJson };
enum class LogLevel { kInfo, kWarning, kError };

// Sets the process-wide format (default kText).
void SetLogFormat(LogFormat format);
LogFormat GetLogFormat();

// One named value of a JSON log line: a string, a number (non-finite numbers become null) or a
// bool.
class LogField {
 public:
  LogField(std::string_view key, std::string_view value);
  LogField(std::string_view key, const char* value) : LogField(key, std::string_view(value)) {}
  LogField(std::string_view key, const std::string& value)
      : LogField(key, std::string_view(value)) {}
  template <typename T, typename = std::enable_if_t<std::is_arithmetic_v<T>>>
  LogField(std::string_view key, T value) : key_(key), json_(NumberJson(value)) {}

  // A value the caller has already encoded as JSON (an object or array); it must be valid JSON
  // on one line.
  static LogField Encoded(std::string_view key, std::string json_value) {
    LogField f(key, 0);
    f.json_ = std::move(json_value);
    return f;
  }

  const std::string& key() const { return key_; }
  const std::string& json() const { return json_; }  // the value, encoded as JSON

 private:
  static std::string NumberJson(double value);
  static std::string NumberJson(long long value);
  template <typename T>
  static std::string NumberJson(T value) {
    if constexpr (std::is_same_v<T, bool>) {
      return value ? "true" : "false";
    } else if constexpr (std::is_floating_point_v<T>) {
      return NumberJson(static_cast<double>(value));
    } else {
      return NumberJson(static_cast<long long>(value));
    }
  }

  std::string key_;
  std::string json_;
};

// Writes one line to `out` and flushes: `text` and a newline (kText), or the JSON object
// (kJson). `text` should hold no newline.
void LogLine(FILE* out, LogLevel level, std::string_view text,
             std::initializer_list<LogField> fields = {});

// LogLine with printf-style text and no fields; the format needs no trailing newline.
void LogPrintf(FILE* out, LogLevel level, const char* format, ...)
    __attribute__((format(printf, 3, 4)));

// The JSON object of one line, without the newline (what LogLine writes in kJson).
std::string JsonLogLine(std::chrono::system_clock::time_point time, LogLevel level,
                        std::string_view text, std::initializer_list<LogField> fields);

// UTC time with milliseconds, RFC 3339: "2026-12-01T23:17:03.512Z" (the lines' "time").
std::string Rfc3339(std::chrono::system_clock::time_point time);

// `text` as a JSON string literal, quotes included.
std::string JsonString(std::string_view text);

}  // namespace chorus

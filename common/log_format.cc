#include "common/log_format.h"

#include <atomic>
#include <charconv>
#include <cmath>
#include <cstdarg>
#include <ctime>
#include <vector>

namespace chorus {
namespace {

std::atomic<LogFormat> g_format{LogFormat::kText};

const char* LevelName(LogLevel level) {
  switch (level) {
    case LogLevel::kInfo:
      return "info";
    case LogLevel::kWarning:
      return "warning";
    case LogLevel::kError:
      return "error";
  }
  return "info";
}

// Length of the valid UTF-8 sequence starting at s[i], or 0 if the bytes there are not one
// (overlong forms, surrogates and code points above U+10FFFF are invalid).
size_t Utf8Length(std::string_view s, size_t i) {
  const auto byte = [&](size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char b = byte(i);
  size_t n;
  unsigned lo = 0x80, hi = 0xBF;  // allowed range of the second byte
  if (b < 0x80) return 1;
  if (b >= 0xC2 && b <= 0xDF)
    n = 2;
  else if (b >= 0xE0 && b <= 0xEF)
    n = 3, lo = b == 0xE0 ? 0xA0 : 0x80, hi = b == 0xED ? 0x9F : 0xBF;
  else if (b >= 0xF0 && b <= 0xF4)
    n = 4, lo = b == 0xF0 ? 0x90 : 0x80, hi = b == 0xF4 ? 0x8F : 0xBF;
  else
    return 0;
  if (i + n > s.size() || byte(i + 1) < lo || byte(i + 1) > hi) return 0;
  for (size_t k = 2; k < n; ++k) {
    if ((byte(i + k) & 0xC0) != 0x80) return 0;
  }
  return n;
}

void Write(FILE* out, const std::string& line) {
  std::fwrite(line.data(), 1, line.size(), out);
  std::fflush(out);
}

}  // namespace

std::string Rfc3339(std::chrono::system_clock::time_point time) {
  const auto ms =
      std::chrono::duration_cast<std::chrono::milliseconds>(time.time_since_epoch()).count();
  const std::time_t seconds = static_cast<std::time_t>(ms / 1000);
  std::tm utc{};
  gmtime_r(&seconds, &utc);
  char buf[64];
  std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", utc.tm_year + 1900,
                utc.tm_mon + 1, utc.tm_mday, utc.tm_hour, utc.tm_min, utc.tm_sec,
                static_cast<int>(ms % 1000));
  return buf;
}


void SetLogFormat(LogFormat format) { g_format.store(format); }

LogFormat GetLogFormat() { return g_format.load(); }

LogField::LogField(std::string_view key, std::string_view value)
    : key_(key), json_(JsonString(value)) {}

std::string LogField::NumberJson(double value) {
  if (!std::isfinite(value)) return "null";
  char buf[32];
  const auto end = std::to_chars(buf, buf + sizeof buf, value).ptr;  // shortest exact form
  return std::string(buf, end);
}

std::string LogField::NumberJson(long long value) { return std::to_string(value); }

std::string JsonString(std::string_view text) {
  std::string out = "\"";
  for (size_t i = 0; i < text.size();) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    const size_t n = Utf8Length(text, i);
    if (n == 0) {
      out += "\\ufffd";
      ++i;
      continue;
    }
    if (c == '"' || c == '\\') {
      out += '\\';
      out += static_cast<char>(c);
    } else if (c == '\n') {
      out += "\\n";
    } else if (c == '\t') {
      out += "\\t";
    } else if (c < 0x20 || c == 0x7F) {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\u%04x", c);
      out += buf;
    } else {
      out.append(text.substr(i, n));
    }
    i += n;
  }
  return out + "\"";
}

std::string JsonLogLine(std::chrono::system_clock::time_point time, LogLevel level,
                        std::string_view text, std::initializer_list<LogField> fields) {
  std::string line = "{\"time\":\"" + Rfc3339(time) + "\",\"level\":\"" + LevelName(level) +
                     "\",\"msg\":" + JsonString(text);
  for (const LogField& f : fields) line += "," + JsonString(f.key()) + ":" + f.json();
  return line + "}";
}

void LogLine(FILE* out, LogLevel level, std::string_view text,
             std::initializer_list<LogField> fields) {
  if (GetLogFormat() == LogFormat::kJson) {
    Write(out, JsonLogLine(std::chrono::system_clock::now(), level, text, fields) + "\n");
  } else {
    Write(out, std::string(text) + "\n");
  }
}

void LogPrintf(FILE* out, LogLevel level, const char* format, ...) {
  va_list args;
  va_start(args, format);
  va_list copy;
  va_copy(copy, args);
  const int n = std::vsnprintf(nullptr, 0, format, copy);
  va_end(copy);
  std::vector<char> buf(static_cast<size_t>(n < 0 ? 0 : n) + 1);
  std::vsnprintf(buf.data(), buf.size(), format, args);
  va_end(args);
  LogLine(out, level, std::string_view(buf.data(), buf.size() - 1));
}

}  // namespace chorus

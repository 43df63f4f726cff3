#include "common/message_text.h"

#include <cstddef>
#include <cstdio>
#include <cstdlib>

namespace chorus {
namespace {

constexpr size_t kNamesInMessages = 20;

}  // namespace

std::string Quoted(const std::string& s) {
  if (s.size() <= kMaxQuotedBytes) return "\"" + s + "\"";
  return "\"" + s.substr(0, kMaxQuotedBytes - 20) + "...\" (" + std::to_string(s.size()) + " bytes)";
}

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (size_t i = 0; i < names.size() && i < kNamesInMessages; ++i) {
    text += (i ? ", " : "") + names[i];
  }
  return names.size() > kNamesInMessages ? text + ", ..." : text;
}

std::string NumberText(double value) {
  char text[32];
  for (int digits = 1; digits <= 17; ++digits) {
    std::snprintf(text, sizeof text, "%.*g", digits, value);
    if (std::strtod(text, nullptr) == value) break;
  }
  return text;
}

}  // namespace chorus

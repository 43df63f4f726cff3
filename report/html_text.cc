#include "report/html_text.h"

#include <cmath>
#include <cstdio>

namespace chorus {
namespace {

std::string Printf(const char* format, int precision, double v) {
  if (!std::isfinite(v)) return "n/a";
  char buf[64];
  std::snprintf(buf, sizeof buf, format, precision, v);
  return buf;
}

}  // namespace

std::string EscapeHtml(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

std::string FormatFixed(double v, int decimals) { return Printf("%.*f", decimals, v); }

std::string FormatSignificant(double v, int digits) { return Printf("%.*g", digits, v); }

}  // namespace chorus

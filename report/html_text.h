// Text helpers shared by the HTML report and its SVG charts: escaping and locale-independent
// number formatting (so a report is a pure, byte-stable function of its report.json).
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

namespace chorus {

// Replaces & < > " ' with their character references; safe in text and in quoted attributes.
std::string EscapeHtml(const std::string& text);

// v with exactly `decimals` digits after the point: FormatFixed(0.12345, 3) == "0.123".
// NaN and infinities come out as "n/a".
std::string FormatFixed(double v, int decimals);

// v with up to `digits` significant digits, trailing zeros dropped ("%g"):
// FormatSignificant(0.5, 4) == "0.5", FormatSignificant(1234.56, 4) == "1235"; exponent form
// below 1e-4 and from 10^digits up ("1e-05"). NaN and infinities come out as "n/a".
std::string FormatSignificant(double v, int digits);

}  // namespace chorus

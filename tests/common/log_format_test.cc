// common/log_format.h: JSON log lines are valid JSON (checked by parsing them with nlohmann::json)
// with the documented keys, strings are escaped, and text mode prints exactly the text.
#include "common/log_format.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>

namespace chorus {
namespace log_format_test {

using nlohmann::json;

// 2026-12-02T00:38:27.512Z
const std::chrono::system_clock::time_point kTime{std::chrono::milliseconds(1796171907512)};

TEST(LogFormatTest, JsonLineHasTimeLevelMessageAndFields) {
  const std::string line =
      JsonLogLine(kTime, LogLevel::kWarning, "member 3 epoch 2/20",
                  {{"member", 3}, {"loss", 0.25}, {"host", "node-1"}, {"ok", true}});
  EXPECT_EQ(line,
            R"({"time":"2026-12-02T00:38:27.512Z","level":"warning","msg":"member 3 epoch 2/20",)"
            R"("member":3,"loss":0.25,"host":"node-1","ok":true})");
}

TEST(LogFormatTest, NumbersAreShortestExactAndNonFiniteIsNull) {
  const json j = json::parse(JsonLogLine(
      kTime, LogLevel::kInfo, "",
      {{"a", 0.1}, {"b", 1e300}, {"c", std::nan("")}, {"d", -7LL}, {"e", size_t{1} << 40}}));
  EXPECT_EQ(j["a"].get<double>(), 0.1);
  EXPECT_EQ(j["b"].get<double>(), 1e300);
  EXPECT_TRUE(j["c"].is_null());
  EXPECT_EQ(j["d"].get<long long>(), -7);
  EXPECT_EQ(j["e"].get<long long>(), 1LL << 40);
}

TEST(LogFormatTest, StringsAreEscapedAndInvalidUtf8Replaced) {
  const struct {
    std::string text, expected;  // expected: the JSON literal
  } cases[] = {
      {"plain", R"("plain")"},
      {"quote \" backslash \\", R"("quote \" backslash \\")"},
      {"line\nbreak\ttab\x01", R"("line\nbreak\ttab\u0001")"},
      {"caf\xc3\xa9 \xe2\x82\xac", "\"caf\xc3\xa9 \xe2\x82\xac\""},  // valid UTF-8 passes
      {"bad \xff byte", R"("bad \ufffd byte")"},
      {"cut \xe2\x82", R"("cut \ufffd\ufffd")"},  // a truncated sequence
      {"overlong \xc0\xaf", R"("overlong \ufffd\ufffd")"},
      {"surrogate \xed\xa0\x80", R"("surrogate \ufffd\ufffd\ufffd")"},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(c.expected);
    EXPECT_EQ(JsonString(c.text), c.expected);
    EXPECT_FALSE(json::parse(JsonString(c.text), nullptr, false).is_discarded());
  }
}

// What LogLine / LogPrintf write to a file in `format`.
std::string Written(LogFormat format) {
  SetLogFormat(format);
  FILE* f = std::tmpfile();
  LogLine(f, LogLevel::kInfo, "run directory: runs/x", {{"run_dir", "runs/x"}});
  LogPrintf(f, LogLevel::kError, "member %d FAILED: %s", 2, "diverged");
  SetLogFormat(LogFormat::kText);
  std::rewind(f);
  std::string text;
  for (int c; (c = std::fgetc(f)) != EOF;) text += static_cast<char>(c);
  std::fclose(f);
  return text;
}

TEST(LogFormatTest, TextModePrintsTheTextOnly) {
  EXPECT_EQ(Written(LogFormat::kText), "run directory: runs/x\nmember 2 FAILED: diverged\n");
}

TEST(LogFormatTest, JsonModePrintsOneObjectPerLine) {
  const std::string text = Written(LogFormat::kJson);
  const size_t newline = text.find('\n');
  ASSERT_NE(newline, std::string::npos);
  const json first = json::parse(text.substr(0, newline));
  const json second = json::parse(text.substr(newline + 1));
  EXPECT_EQ(first["level"], "info");
  EXPECT_EQ(first["msg"], "run directory: runs/x");
  EXPECT_EQ(first["run_dir"], "runs/x");
  EXPECT_EQ(second["level"], "error");
  EXPECT_EQ(second["msg"], "member 2 FAILED: diverged");
  EXPECT_EQ(second["time"].get<std::string>().size(),
            std::string("2026-12-02T00:38:27.512Z").size());
}

}  // namespace log_format_test
}  // namespace chorus

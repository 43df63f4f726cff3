// Small pieces of text for error messages: quoted values, short name lists, exact numbers.
// Thread safety: pure functions, reentrant.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace chorus {

// `s` between double quotes, unescaped: "site". Past kMaxQuotedBytes only the start is shown, then
// how long the whole is: "xxxx..." (1048576 bytes), so that a huge field cannot flood a message.
constexpr size_t kMaxQuotedBytes = 80;
std::string Quoted(const std::string& s);

// The first 20 names joined by ", ", then ", ..." when there are more.
std::string JoinNames(const std::vector<std::string>& names);

// The shortest text that reads back as the same double ("0.1", not "0.100000").
std::string NumberText(double value);

}  // namespace chorus

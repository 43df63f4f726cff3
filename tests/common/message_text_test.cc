// common/message_text.h: values in messages are quoted, and a huge one (a field of a 10 GB line)
// is cut to its start and its length.
#include "common/message_text.h"

#include <gtest/gtest.h>

namespace chorus {
namespace message_text_test {

TEST(MessageTextTest, ShortValuesAreQuotedWhole) {
  EXPECT_EQ(Quoted("site"), "\"site\"");
  EXPECT_EQ(Quoted(std::string(kMaxQuotedBytes, 'a')), "\"" + std::string(kMaxQuotedBytes, 'a') + "\"");
}

TEST(MessageTextTest, HugeValuesShowTheirStartAndLength) {
  const std::string huge(1 << 20, 'x');
  EXPECT_EQ(Quoted(huge), "\"" + std::string(kMaxQuotedBytes - 20, 'x') + "...\" (1048576 bytes)");
}

TEST(MessageTextTest, NumbersReadBackExactly) {
  EXPECT_EQ(NumberText(0.1), "0.1");
  EXPECT_EQ(std::stod(NumberText(1.0 / 3.0)), 1.0 / 3.0);
}

}  // namespace message_text_test
}  // namespace chorus

#include "common/csv.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "tests/testing/reference.h"

namespace chorus {
namespace csv_test {

// ReadCsv on `text` written to a file named t.csv in a fresh directory; messages are shown with
// the directory removed ("t.csv:3:3: ...").
StatusOr<CsvTable> ReadText(std::string_view text, int64_t max_record_bytes = CsvReader::kDefaultMaxRecordBytes) {
  const std::string dir = testing::MakeTempDir("csv_test");
  std::ofstream(dir + "/t.csv", std::ios::binary) << text;
  StatusOr<CsvTable> table = ReadCsv(dir + "/t.csv", max_record_bytes);
  std::filesystem::remove_all(dir);
  if (table.ok()) return table;
  std::string message = table.status().message();
  for (size_t at; (at = message.find(dir + "/")) != std::string::npos;) message.erase(at, dir.size() + 1);
  return Status::InvalidInput(message);
}

CsvTable ParseOk(std::string_view text) {
  StatusOr<CsvTable> table = ReadText(text);
  EXPECT_TRUE(table.ok()) << table.status().ToString();
  return table.ok() ? table.value() : CsvTable();
}

std::string ParseError(std::string_view text, int64_t max_record_bytes = CsvReader::kDefaultMaxRecordBytes) {
  StatusOr<CsvTable> table = ReadText(text, max_record_bytes);
  EXPECT_FALSE(table.ok());
  EXPECT_EQ(table.status().code(), Status::Code::kInvalidInput);
  return table.status().message();
}

TEST(CsvTest, ReadsHeaderRowsAndLines) {
  const CsvTable t = ParseOk("a,b\n1,2\n3,4");
  EXPECT_EQ(t.header, (std::vector<std::string>{"a", "b"}));
  EXPECT_EQ(t.rows, (std::vector<std::vector<std::string>>{{"1", "2"}, {"3", "4"}}));
  EXPECT_EQ(t.lines, (std::vector<int64_t>{2, 3}));
  EXPECT_EQ(t.header_line, 1);
}

// RFC 4180 section 2, rule 6: fields containing commas are enclosed in double quotes.
TEST(CsvTest, QuotedFieldKeepsItsComma) {
  EXPECT_EQ(ParseOk("a,b\n\"x,y\",2\n").rows[0][0], "x,y");
}

// RFC 4180 section 2, rule 7: a double quote inside a quoted field is escaped by doubling it.
TEST(CsvTest, DoubledQuoteIsOneQuote) {
  EXPECT_EQ(ParseOk("a,b\n\"say \"\"hi\"\"\",2\n").rows[0][0], "say \"hi\"");
  EXPECT_EQ(ParseOk("a,b\n\"\",2\n").rows[0][0], "");
}

// RFC 4180 section 2, rule 6: fields containing line breaks are enclosed in double quotes; the
// next record starts on the line after the quoted break.
TEST(CsvTest, QuotedFieldMaySpanLines) {
  const CsvTable t = ParseOk("a,b\n\"one\ntwo\",2\n3,4\n");
  EXPECT_EQ(t.rows[0][0], "one\ntwo");
  EXPECT_EQ(t.lines, (std::vector<int64_t>{2, 4}));
}

// RFC 4180 section 2, rules 1 and 2: records end in CRLF; the last record may omit it.
TEST(CsvTest, CrlfLineEnds) {
  const CsvTable t = ParseOk("a,b\r\n1,2\r\n3,4");
  EXPECT_EQ(t.header, (std::vector<std::string>{"a", "b"}));
  EXPECT_EQ(t.rows, (std::vector<std::vector<std::string>>{{"1", "2"}, {"3", "4"}}));
  EXPECT_EQ(t.lines, (std::vector<int64_t>{2, 3}));
}

TEST(CsvTest, BlankLinesAreSkippedAndCounted) {
  const CsvTable t = ParseOk("\na,b\n\n1,2\r\n\r\n3,4\n\n");
  EXPECT_EQ(t.header_line, 2);
  EXPECT_EQ(t.lines, (std::vector<int64_t>{4, 6}));
}

TEST(CsvTest, EmptyFieldsAreKept) {
  EXPECT_EQ(ParseOk("a,b,c\n,x,\n").rows[0], (std::vector<std::string>{"", "x", ""}));
}

TEST(CsvTest, RaggedRowNamesLineAndField) {
  EXPECT_EQ(ParseError("a,b\n1,2\n1,2,3\n"), "t.csv:3:3: expected 2 fields, found 3");
  EXPECT_EQ(ParseError("a,b\n1\n"), "t.csv:2:2: expected 2 fields, found 1");
}

TEST(CsvTest, MalformedInputIsRejectedWithItsPlace) {
  EXPECT_EQ(ParseError(""), "t.csv: file is empty");
  EXPECT_EQ(ParseError("\n\r\n"), "t.csv: file is empty");
  EXPECT_EQ(ParseError("a,b\n"), "t.csv:1: expected data rows after the header, found none");
  EXPECT_EQ(ParseError("a,a\n1,2\n"), "t.csv:1:2: duplicate column name \"a\"");
  EXPECT_EQ(ParseError("a,\n1,2\n"), "t.csv:1:2: expected a column name, found \"\"");
  EXPECT_NE(ParseError("a,b\r1,2\r3,4\r").find("t.csv:1:2: a carriage return inside the header"),
            std::string::npos);
  EXPECT_NE(ParseError("a,b\n1,\"open\n2,3\n").find("t.csv:2:2: expected a closing '\"'"),
            std::string::npos);
  EXPECT_NE(ParseError("a,b\n\"x\"y,2\n").find("t.csv:2:1: expected ',' or the end of the line"),
            std::string::npos);
}

// A record past the bound (16 MiB by default; a 10 GB line would be one) ends the reading with
// its line, before it is held in memory.
TEST(CsvTest, ARecordLongerThanTheBoundIsRefusedWithItsLine) {
  const std::string long_field(300, 'x');
  EXPECT_EQ(ParseError("a,b\n1,2\n" + long_field + ",3\n", 100),
            "t.csv:3: a record longer than 100 bytes (an unterminated quote?)");
}

TEST(CsvTest, ReadCsvReadsAFileAndNamesAMissingOne) {
  const std::string dir = testing::MakeTempDir("csv_test");
  const std::string path = dir + "/data.csv";
  std::ofstream(path) << "x,y\n1,a\n";
  StatusOr<CsvTable> table = ReadCsv(path);
  ASSERT_TRUE(table.ok()) << table.status().ToString();
  EXPECT_EQ(table.value().path, path);
  EXPECT_EQ(table.value().rows.size(), 1u);

  StatusOr<CsvTable> missing = ReadCsv(dir + "/absent.csv");
  EXPECT_EQ(missing.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(missing.status().message().find(dir + "/absent.csv: cannot open file"),
            std::string::npos);
}

}  // namespace csv_test
}  // namespace chorus

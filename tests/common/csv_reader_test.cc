// The streaming CSV reader, chorus's one CSV parser: the dialect record by record, and reading
// on after a malformed record instead of stopping.
#include "common/csv_reader.h"

#include <gtest/gtest.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>

#include "tests/testing/reference.h"

namespace chorus {
namespace csv_reader_test {

class CsvReaderTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("chorus-csv-reader"); }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  std::string Write(const std::string& text) {
    const std::string path = dir_ + "/f.csv";
    std::ofstream(path, std::ios::binary) << text;
    return path;
  }

  // Every record, with its problem (if any) as text.
  static std::vector<CsvRecord> ReadAll(CsvReader& reader) {
    std::vector<CsvRecord> records;
    CsvRecord record;
    while (true) {
      StatusOr<bool> more = reader.Next(&record);
      EXPECT_TRUE(more.ok()) << more.status().ToString();
      if (!more.ok() || !more.value()) return records;
      records.push_back(record);
    }
  }

  std::string dir_;
};

TEST_F(CsvReaderTest, ReadsTheWholeDialectAcrossItsBuffer) {
  // A byte order mark, CRLF and LF, blank lines, quoted fields with "" and line breaks, a lone
  // quote inside an unquoted field, and enough rows to cross the reader's 64 KiB buffer; the
  // expected records are written down as the text is built.
  std::string text =
      "\xEF\xBB\xBF"
      "a,b,c\r\n\n1,\"x,\"\"y\"\"\",3\n";
  std::vector<std::vector<std::string>> rows = {{"1", "x,\"y\"", "3"}};
  std::vector<int64_t> lines = {3};
  int64_t line = 4;
  for (int i = 0; i < 3000; ++i) {
    text += std::to_string(i) + ",\"multi\nline " + std::to_string(i) + "\",q\"t\r\n";
    rows.push_back({std::to_string(i), "multi\nline " + std::to_string(i), "q\"t"});
    lines.push_back(line);
    line += 2;
    if (i % 500 == 0) {
      text += "\n\n";
      line += 2;
    }
  }
  StatusOr<std::unique_ptr<CsvReader>> reader = CsvReader::Open(Write(text));
  ASSERT_TRUE(reader.ok()) << reader.status().ToString();
  EXPECT_EQ(reader.value()->header(), (std::vector<std::string>{"a", "b", "c"}));
  EXPECT_EQ(reader.value()->header_line(), 1);
  const std::vector<CsvRecord> records = ReadAll(*reader.value());
  ASSERT_EQ(records.size(), rows.size());
  for (size_t r = 0; r < records.size(); ++r) {
    ASSERT_TRUE(records[r].problem.ok()) << records[r].problem.ToString();
    ASSERT_EQ(records[r].fields, rows[r]) << "record " << r;
    ASSERT_EQ(records[r].line, lines[r]) << "record " << r;
  }
}

TEST_F(CsvReaderTest, MalformedRecordsComeBackWithTheirPlaceAndReadingGoesOn) {
  const std::string path = Write("a,b\n1,2\n3\n\"x\"y,4\n5,6\n7,8,9\n10,\"open\n11,12\n");
  StatusOr<std::unique_ptr<CsvReader>> reader = CsvReader::Open(path);
  ASSERT_TRUE(reader.ok());
  const std::vector<CsvRecord> r = ReadAll(*reader.value());
  ASSERT_EQ(r.size(), 6u);
  EXPECT_TRUE(r[0].problem.ok());
  EXPECT_NE(r[1].problem.message().find(path + ":3:2: expected 2 fields, found 1"),
            std::string::npos)
      << r[1].problem.ToString();
  EXPECT_NE(r[2].problem.message().find(path + ":4:1: expected ',' or the end of the line"),
            std::string::npos)
      << r[2].problem.ToString();
  EXPECT_TRUE(r[3].problem.ok());
  EXPECT_EQ(r[3].fields, (std::vector<std::string>{"5", "6"}));
  EXPECT_EQ(r[3].line, 5);
  EXPECT_NE(r[4].problem.message().find(path + ":6:3: expected 2 fields, found 3"),
            std::string::npos);
  EXPECT_NE(r[5].problem.message().find(path + ":7:2: expected a closing '\"'"), std::string::npos)
      << r[5].problem.ToString();
}

TEST_F(CsvReaderTest, BadHeadersAndOversizedRecordsAreErrors) {
  EXPECT_NE(CsvReader::Open(Write("")).status().message().find("file is empty"), std::string::npos);
  EXPECT_NE(CsvReader::Open(Write("a,a\n1,2\n")).status().message().find("duplicate column"),
            std::string::npos);
  EXPECT_EQ(CsvReader::Open(dir_ + "/missing.csv").status().code(), Status::Code::kInvalidInput);
  StatusOr<std::unique_ptr<CsvReader>> reader =
      CsvReader::Open(Write("a\n" + std::string(200, 'x') + "\n"), /*max_record_bytes=*/100);
  ASSERT_TRUE(reader.ok());
  CsvRecord record;
  const StatusOr<bool> next = reader.value()->Next(&record);
  EXPECT_EQ(next.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(next.status().message().find("longer than 100 bytes"), std::string::npos);
}

TEST_F(CsvReaderTest, GzipFilesReadLikeTheirContentAndACutOneIsAnError) {
  // Compressed by gzip(1) (Debian's gzip package), not by the zlib the reader uses.
  std::string text = "id,note\n";
  for (int i = 0; i < 5000; ++i) text += std::to_string(i) + ",\"row " + std::to_string(i) + "\"\n";
  const std::string plain = Write(text);
  const std::string gz = dir_ + "/f.csv.gz";
  ASSERT_EQ(std::system(("gzip -c " + plain + " > " + gz).c_str()), 0);
  StatusOr<std::unique_ptr<CsvReader>> a = CsvReader::Open(plain), b = CsvReader::Open(gz);
  ASSERT_TRUE(a.ok() && b.ok());
  const std::vector<CsvRecord> from_plain = ReadAll(*a.value()), from_gz = ReadAll(*b.value());
  ASSERT_EQ(from_gz.size(), 5000u);
  for (size_t i = 0; i < from_gz.size(); ++i) {
    EXPECT_EQ(from_gz[i].fields, from_plain[i].fields) << i;
    EXPECT_EQ(from_gz[i].line, from_plain[i].line) << i;
  }
  // The compressed file cut in half: the rows before the cut, then an error naming the file.
  const std::uintmax_t size = std::filesystem::file_size(gz);
  std::filesystem::resize_file(gz, size / 2);
  StatusOr<std::unique_ptr<CsvReader>> cut = CsvReader::Open(gz);
  ASSERT_TRUE(cut.ok()) << cut.status().ToString();
  CsvRecord record;
  StatusOr<bool> more = true;
  int rows = 0;
  while (more.ok() && more.value()) {
    more = cut.value()->Next(&record);
    rows += more.ok() && more.value() ? 1 : 0;
  }
  EXPECT_GT(rows, 0);
  EXPECT_LT(rows, 5000);
  EXPECT_EQ(more.status().code(), Status::Code::kInvalidInput);
  EXPECT_EQ(more.status().message(), gz + ": bad gzip data: unexpected end of file");
}

}  // namespace csv_reader_test
}  // namespace chorus

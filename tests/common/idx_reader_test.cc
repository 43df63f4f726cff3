// The streaming IDX reader gives the rows ReadIdx gives (common/idx.h), plain or gzip, batch by
// batch, and refuses truncated files and trailing bytes.
#include "common/idx_reader.h"

#include <gtest/gtest.h>
#include <zlib.h>

#include <cstring>
#include <filesystem>
#include <fstream>

#include "common/idx.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace idx_reader_test {

// IDX bytes: magic 0x0000TTDD, big-endian uint32 sizes, then the elements as given.
std::string Idx(uint8_t type, const std::vector<uint32_t>& dims, const std::string& elements) {
  std::string bytes = {0, 0, static_cast<char>(type), static_cast<char>(dims.size())};
  for (uint32_t d : dims) {
    for (int shift = 24; shift >= 0; shift -= 8) bytes += static_cast<char>((d >> shift) & 0xFF);
  }
  return bytes + elements;
}

// n big-endian float64 values -1.5, -0.5, 0.5, ...
std::string Doubles(int n) {
  std::string bytes;
  for (int i = 0; i < n; ++i) {
    const double v = i - 1.5;
    uint64_t bits;
    std::memcpy(&bits, &v, 8);
    for (int shift = 56; shift >= 0; shift -= 8) bytes += static_cast<char>((bits >> shift) & 0xFF);
  }
  return bytes;
}

class IdxReaderTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("chorus-idx-reader"); }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  std::string Write(const std::string& name, const std::string& bytes, bool gzip) {
    const std::string path = dir_ + "/" + name;
    if (!gzip) {
      std::ofstream(path, std::ios::binary) << bytes;
      return path;
    }
    gzFile file = gzopen(path.c_str(), "wb");
    gzwrite(file, bytes.data(), static_cast<unsigned>(bytes.size()));
    gzclose(file);
    return path;
  }

  std::string dir_;
};

TEST_F(IdxReaderTest, BatchesHoldReadIdxsRowsPlainAndGzip) {
  std::string pixels;
  for (int i = 0; i < 7 * 3 * 2; ++i) pixels += static_cast<char>(i * 5);
  for (const auto& [type, elements] : {std::pair<uint8_t, std::string>{0x08, pixels},
                                       std::pair<uint8_t, std::string>{0x0E, Doubles(42)}}) {
    for (bool gzip : {false, true}) {
      SCOPED_TRACE(std::to_string(type) + (gzip ? " gzip" : " plain"));
      const std::string path = Write("x.idx", Idx(type, {7, 3, 2}, elements), gzip);
      const StatusOr<IdxArray> whole = ReadIdx(path);
      ASSERT_TRUE(whole.ok()) << whole.status().ToString();
      StatusOr<std::unique_ptr<IdxReader>> reader = IdxReader::Open(path);
      ASSERT_TRUE(reader.ok()) << reader.status().ToString();
      EXPECT_EQ(reader.value()->rows(), 7);
      ASSERT_EQ(reader.value()->RowElements(), 6);
      std::vector<float> got, batch(3 * 6);
      for (StatusOr<int64_t> n = 1; n.value() > 0;) {
        n = reader.value()->Read(3, batch.data());
        ASSERT_TRUE(n.ok()) << n.status().ToString();
        got.insert(got.end(), batch.begin(), batch.begin() + n.value() * 6);
      }
      EXPECT_EQ(got, whole.value().values);
    }
  }
}

TEST_F(IdxReaderTest, TruncatedFilesTrailingBytesAndBadHeadersAreRefused) {
  std::vector<float> row(4);
  auto read_all = [&](const std::string& bytes) {
    StatusOr<std::unique_ptr<IdxReader>> reader = IdxReader::Open(Write("x.idx", bytes, false));
    if (!reader.ok()) return reader.status();
    for (int i = 0; i < 3; ++i) {
      const StatusOr<int64_t> n = reader.value()->Read(1, row.data());
      if (!n.ok()) return n.status();
    }
    return Status::Ok();
  };
  EXPECT_TRUE(read_all(Idx(0x08, {3, 4}, std::string(12, 'a'))).ok());
  EXPECT_NE(read_all(Idx(0x08, {3, 4}, std::string(11, 'a'))).message().find("truncated"),
            std::string::npos);
  EXPECT_NE(read_all(Idx(0x08, {3, 4}, std::string(13, 'a'))).message().find("trailing bytes"),
            std::string::npos);
  EXPECT_NE(read_all("a,b\n1,2\n").message().find("IDX magic"), std::string::npos);
  EXPECT_NE(read_all(Idx(0x08, {3, 0}, "")).message().find("at least 1"), std::string::npos);
  EXPECT_NE(read_all(Idx(0x08, {1, 65536, 65536}, "")).message().find("elements per row"),
            std::string::npos);
}

}  // namespace idx_reader_test
}  // namespace chorus

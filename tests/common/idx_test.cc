#include "common/idx.h"

#include <gtest/gtest.h>
#include <zlib.h>

#include <array>
#include <filesystem>
#include <fstream>

#include "tests/testing/reference.h"

namespace chorus {
namespace idx_test {

// An IDX header: magic 0x0000TTDD, then each size as a big-endian uint32.
std::vector<uint8_t> IdxHeader(uint8_t type, const std::vector<uint32_t>& dims) {
  std::vector<uint8_t> bytes = {0, 0, type, static_cast<uint8_t>(dims.size())};
  for (uint32_t d : dims) {
    for (int shift = 24; shift >= 0; shift -= 8) bytes.push_back(static_cast<uint8_t>(d >> shift));
  }
  return bytes;
}

std::vector<uint8_t> Concat(std::vector<uint8_t> a, const std::vector<uint8_t>& b) {
  a.insert(a.end(), b.begin(), b.end());
  return a;
}

IdxArray ParseOk(const std::vector<uint8_t>& bytes) {
  StatusOr<IdxArray> array = ParseIdx(bytes, "a.idx");
  EXPECT_TRUE(array.ok()) << array.status().ToString();
  return array.ok() ? array.value() : IdxArray();
}

std::string ParseError(const std::vector<uint8_t>& bytes) {
  StatusOr<IdxArray> array = ParseIdx(bytes, "a.idx");
  EXPECT_EQ(array.status().code(), Status::Code::kInvalidInput);
  return array.status().message();
}

class IdxTest : public ::testing::Test {
 protected:
  void SetUp() override { dir_ = testing::MakeTempDir("idx_test"); }
  void TearDown() override { std::filesystem::remove_all(dir_); }

  std::string WritePlain(const std::string& name, const std::vector<uint8_t>& bytes) {
    const std::string path = dir_ + "/" + name;
    std::ofstream(path, std::ios::binary)
        .write(reinterpret_cast<const char*>(bytes.data()),
               static_cast<std::streamsize>(bytes.size()));
    return path;
  }

  std::string WriteGzip(const std::string& name, const std::vector<uint8_t>& bytes) {
    const std::string path = dir_ + "/" + name;
    gzFile file = gzopen(path.c_str(), "wb");
    EXPECT_NE(file, nullptr);
    EXPECT_EQ(gzwrite(file, bytes.data(), static_cast<unsigned>(bytes.size())),
              static_cast<int>(bytes.size()));
    gzclose(file);
    return path;
  }

  std::string dir_;
};

TEST_F(IdxTest, ReadsUnsignedBytesRowMajor) {
  const IdxArray a = ParseOk(Concat(IdxHeader(0x08, {2, 3}), {0, 1, 2, 3, 4, 255}));
  EXPECT_EQ(a.dims, (std::vector<int64_t>{2, 3}));
  EXPECT_EQ(a.values, (std::vector<float>{0, 1, 2, 3, 4, 255}));
}

TEST_F(IdxTest, DecodesEveryTypeBigEndian) {
  EXPECT_EQ(ParseOk(Concat(IdxHeader(0x09, {2}), {0xFF, 0x7F})).values,
            (std::vector<float>{-1, 127}));
  EXPECT_EQ(ParseOk(Concat(IdxHeader(0x0B, {2}), {0xFF, 0xFE, 0x01, 0x00})).values,
            (std::vector<float>{-2, 256}));
  EXPECT_EQ(ParseOk(Concat(IdxHeader(0x0C, {1}), {0xFF, 0xFF, 0xFF, 0xFD})).values,
            (std::vector<float>{-3}));
  // 1.5f is 0x3FC00000; -2.25 as a double is 0xC002000000000000.
  EXPECT_EQ(ParseOk(Concat(IdxHeader(0x0D, {1}), {0x3F, 0xC0, 0x00, 0x00})).values,
            (std::vector<float>{1.5f}));
  EXPECT_EQ(ParseOk(Concat(IdxHeader(0x0E, {1}), {0xC0, 0x02, 0, 0, 0, 0, 0, 0})).values,
            (std::vector<float>{-2.25f}));
}

TEST_F(IdxTest, MalformedBytesAreRejectedWithWhatWasExpected) {
  EXPECT_EQ(ParseError({}), "a.idx: file is empty");
  EXPECT_NE(ParseError({1, 2, 3, 4}).find("a.idx: byte 0: expected the IDX magic"),
            std::string::npos);
  EXPECT_NE(ParseError(IdxHeader(0x0A, {1})).find("a.idx: byte 2: expected an IDX type code"),
            std::string::npos);
  EXPECT_NE(ParseError({0, 0, 8, 0}).find("byte 3: expected at least 1 dimension"),
            std::string::npos);
  EXPECT_NE(ParseError({0, 0, 8, 2, 0, 0}).find("expected a 12-byte header"), std::string::npos);
  EXPECT_NE(ParseError(IdxHeader(0x08, {2, 0}))
                .find("a.idx: byte 8: expected a size of at least "
                      "1 for dimension 1, found 0"),
            std::string::npos);
}

TEST_F(IdxTest, SizeMismatchIsRejected) {
  EXPECT_NE(ParseError(Concat(IdxHeader(0x08, {2, 2}), {1, 2, 3}))
                .find("a.idx: truncated: the header promises 4 elements (dims 2x2) in 4 bytes"),
            std::string::npos);
  EXPECT_NE(ParseError(Concat(IdxHeader(0x0B, {1}), {1, 2, 3}))
                .find("a.idx: byte 10: the header promises 1 element (dims 1) in 2 bytes"),
            std::string::npos);
}

TEST_F(IdxTest, RefusesMoreThanTwoToThe31ElementsBeforeAllocating) {
  // 65536 x 65536 = 2^32 elements; only the header is present.
  EXPECT_NE(ParseError(IdxHeader(0x08, {65536, 65536})).find("more than 2^31 elements"),
            std::string::npos);
}

TEST_F(IdxTest, ReadsPlainAndGzipFilesAlike) {
  const std::vector<uint8_t> bytes = Concat(IdxHeader(0x08, {3, 2}), {9, 8, 7, 6, 5, 4});
  for (const std::string& path : {WritePlain("a.idx", bytes), WriteGzip("a.idx.gz", bytes)}) {
    StatusOr<IdxArray> a = ReadIdx(path);
    ASSERT_TRUE(a.ok()) << a.status().ToString();
    EXPECT_EQ(a.value().dims, (std::vector<int64_t>{3, 2}));
    EXPECT_EQ(a.value().values, (std::vector<float>{9, 8, 7, 6, 5, 4}));
  }
}

TEST_F(IdxTest, GzipWithTrailingBytesInsideIsRejected) {
  const std::string path = WriteGzip("b.idx.gz", Concat(IdxHeader(0x08, {2}), {1, 2, 3}));
  StatusOr<IdxArray> a = ReadIdx(path);
  EXPECT_EQ(a.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(a.status().message().find(path + ": byte 10:"), std::string::npos)
      << a.status().message();
}

TEST_F(IdxTest, CutGzipStreamIsRejected) {
  std::vector<uint8_t> element(4000, 7);
  const std::string full = WriteGzip("c.idx.gz", Concat(IdxHeader(0x08, {4000}), element));
  std::ifstream in(full, std::ios::binary);
  std::vector<uint8_t> gz((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  gz.resize(gz.size() / 2);
  const std::string cut = WritePlain("cut.idx.gz", gz);
  StatusOr<IdxArray> a = ReadIdx(cut);
  EXPECT_EQ(a.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(a.status().message().find(cut + ":"), std::string::npos) << a.status().message();
}

TEST_F(IdxTest, MissingFileIsInvalidInputNamingThePath) {
  StatusOr<IdxArray> a = ReadIdx(dir_ + "/absent.idx");
  EXPECT_EQ(a.status().code(), Status::Code::kInvalidInput);
  EXPECT_NE(a.status().message().find(dir_ + "/absent.idx: cannot open file"), std::string::npos);
}

// Debian's dataset-fashion-mnist package. Xiao et al. 2017 ("Fashion-MNIST: a Novel Image Dataset
// for Benchmarking Machine Learning Algorithms") describe 10000 test images of 28x28 pixels,
// 1000 per each of 10 classes.
TEST_F(IdxTest, FashionMnistTestSetHasThePublishedShape) {
  const std::string dir = "/usr/share/datasets/fashion-mnist/";
  const std::string images_path = dir + "t10k-images-idx3-ubyte.gz";
  const std::string labels_path = dir + "t10k-labels-idx1-ubyte.gz";
  if (!std::filesystem::exists(images_path) || !std::filesystem::exists(labels_path)) {
    GTEST_SKIP() << "Fashion-MNIST not installed at " << dir
                 << " (Debian package dataset-fashion-mnist)";
  }
  StatusOr<IdxArray> images = ReadIdx(images_path);
  StatusOr<IdxArray> labels = ReadIdx(labels_path);
  ASSERT_TRUE(images.ok()) << images.status().ToString();
  ASSERT_TRUE(labels.ok()) << labels.status().ToString();
  EXPECT_EQ(images.value().dims, (std::vector<int64_t>{10000, 28, 28}));
  EXPECT_EQ(labels.value().dims, (std::vector<int64_t>{10000}));
  std::array<int, 10> per_class{};
  for (float label : labels.value().values) {
    ASSERT_TRUE(label >= 0 && label <= 9 && label == static_cast<int>(label)) << label;
    ++per_class[static_cast<int>(label)];
  }
  for (int count : per_class) EXPECT_EQ(count, 1000);
}

}  // namespace idx_test
}  // namespace chorus

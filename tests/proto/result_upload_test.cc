// proto/result_upload.h: a result upload reassembled from chunks, refused when its announced size
// is out of bounds, its payloads overrun it, it ends short, or its SHA-256 differs.
#include "proto/result_upload.h"

#include <gtest/gtest.h>

#include <cmath>
#include <optional>

#include "common/sha256.h"

namespace chorus {
namespace result_upload_test {

wire::ResultChunk Chunk(const std::string& payload, int64_t total = -1, const std::string& sha = "") {
  wire::ResultChunk c;
  if (total >= 0) {
    c.set_job_id("3");
    c.set_worker_id("w1");
    c.set_total_bytes(total);
    c.set_sha256(sha);
  }
  c.set_payload(payload);
  return c;
}

TEST(ResultUploadTest, ChunksInOrderGiveTheAnnouncedBytes) {
  const std::string whole = "0123456789";
  ResultUpload upload(100);
  ASSERT_TRUE(upload.Add(Chunk("0123", 10, Sha256Hex(whole.data(), whole.size()))).ok());
  ASSERT_TRUE(upload.Add(Chunk("456")).ok());
  ASSERT_TRUE(upload.Add(Chunk("789")).ok());
  EXPECT_EQ(upload.header().job_id(), "3");
  EXPECT_TRUE(upload.header().payload().empty()) << "the header keeps no payload copy";
  const StatusOr<std::string> bytes = upload.Finish();
  ASSERT_TRUE(bytes.ok()) << bytes.status().ToString();
  EXPECT_EQ(bytes.value(), whole);
}

TEST(ResultUploadTest, RefusesAnOversizedOrNegativeAnnouncement) {
  ResultUpload too_large(100);
  EXPECT_EQ(too_large.Add(Chunk("", 101)).code(), Status::Code::kInvalidInput);
  ResultUpload announced_negative(100);
  wire::ResultChunk c = Chunk("", 0);
  c.set_total_bytes(-5);
  EXPECT_EQ(announced_negative.Add(c).code(), Status::Code::kInvalidInput);
}

TEST(ResultUploadTest, RefusesPayloadsBeyondTheAnnouncedSize) {
  ResultUpload upload(100);
  ASSERT_TRUE(upload.Add(Chunk("0123", 6)).ok());
  const Status st = upload.Add(Chunk("456"));
  EXPECT_EQ(st.code(), Status::Code::kInvalidInput);
  EXPECT_NE(st.message().find("more result bytes"), std::string::npos) << st.message();
}

TEST(ResultUploadTest, RefusesAShortOrCorruptedOrEmptyUpload) {
  const std::string whole = "abcdef";
  const std::string sha = Sha256Hex(whole.data(), whole.size());
  ResultUpload short_upload(100);
  ASSERT_TRUE(short_upload.Add(Chunk("abc", 6, sha)).ok());
  EXPECT_EQ(short_upload.Finish().status().code(), Status::Code::kInvalidInput);
  ResultUpload corrupted(100);
  ASSERT_TRUE(corrupted.Add(Chunk("abcdeX", 6, sha)).ok());
  EXPECT_EQ(corrupted.Finish().status().code(), Status::Code::kInvalidInput);
  ResultUpload empty(100);
  EXPECT_EQ(empty.Finish().status().code(), Status::Code::kInvalidInput);
}

// The job's cost rides on the first chunk: read back as sent, and dropped (not the upload) when
// absent, negative or not finite.
TEST(ResultUploadTest, CpuSecondsOfTheFirstChunkAreKeptOnlyWhenValid) {
  const auto upload_with = [](const std::optional<MemberResult::CpuSeconds>& cpu) {
    wire::ResultChunk first = Chunk("", 0, Sha256Hex("", 0));
    if (cpu) *first.mutable_cpu_seconds() = CpuSecondsToWire(*cpu);
    ResultUpload upload(100);
    EXPECT_TRUE(upload.Add(first).ok());
    EXPECT_TRUE(upload.Finish().ok());
    return upload.CpuSeconds();
  };
  const std::optional<MemberResult::CpuSeconds> kept = upload_with(MemberResult::CpuSeconds{1.5, 0.25, 2});
  ASSERT_TRUE(kept.has_value());
  EXPECT_EQ(kept->training, 1.5);
  EXPECT_EQ(kept->basin_fit, 0.25);
  EXPECT_EQ(kept->samples, 2);
  EXPECT_FALSE(upload_with(std::nullopt).has_value());
  EXPECT_FALSE(upload_with(MemberResult::CpuSeconds{-1, 0, 0}).has_value());
  EXPECT_FALSE(upload_with(MemberResult::CpuSeconds{1, std::nan(""), 0}).has_value());
  EXPECT_FALSE(upload_with(MemberResult::CpuSeconds{1, 0, INFINITY}).has_value());
}

}  // namespace result_upload_test
}  // namespace chorus

// Fuzz target: what a worker uploads. The input is a stream of length-delimited ResultChunk
// messages (service.proto), reassembled as the coordinator does (proto/result_upload.h), and the
// payload bytes decoded as a job result (proto/result_codec.h) with the hashes it names, so the
// decoder's checks past the hash comparison are reached too.
#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <google/protobuf/util/delimited_message_util.h>

#include <string>

#include "job.pb.h"
#include "proto/result_codec.h"
#include "proto/result_upload.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace chorus;
  google::protobuf::io::ArrayInputStream in(data, static_cast<int>(size));
  ResultUpload upload(/*max_bytes=*/int64_t{1} << 20);
  std::string payload;
  wire::ResultChunk chunk;
  bool clean_eof = false;
  while (google::protobuf::util::ParseDelimitedFromZeroCopyStream(&chunk, &in, &clean_eof)) {
    payload += chunk.payload();
    if (!upload.Add(chunk).ok()) break;
  }
  (void)upload.Finish();
  wire::JobResult named;
  if (!named.ParseFromString(payload)) return 0;
  (void)DecodeJobResult(payload, "fuzz result", named.data_hash(), named.config_hash());
  return 0;
}

// Converting a trained member between common/'s MemberResult and the JobResult message, and
// storing it as a file. Thread safety: free functions, reentrant.
#pragma once

#include <cstddef>
#include <functional>
#include <string>

#include "common/member_training.h"
#include "common/status.h"

namespace chorus {

constexpr uint32_t kJobResultFormatVersion = 2;  // 2: role, point, fold, validation NLL, best epoch

// Serialises deterministically (same result => same bytes). widths are the network's widths.
// The bytes are those libprotobuf writes for the JobResult message (proto/job.proto) holding the
// result; the encoder writes them itself, without building the message, so that encoding needs
// no copy of the result's arrays besides its output.
std::string EncodeJobResult(const MemberResult& result, const std::vector<int>& widths,
                            const std::string& data_hash, const std::string& config_hash);

// Receives consecutive pieces of an encoding, each at most kResultPieceBytes; returns false to
// stop the encoding.
using ByteSink = std::function<bool(const char* data, size_t size)>;
constexpr size_t kResultPieceBytes = size_t{1} << 20;

// Streams exactly EncodeJobResult's bytes into `sink`, holding one piece at a time: a result can
// be hashed, then sent, without ever being in memory twice. Returns false if the sink did.
bool WriteJobResult(const MemberResult& result, const std::vector<int>& widths,
                    const std::string& data_hash, const std::string& config_hash,
                    const ByteSink& sink);

// Parses and checks: format version, hashes equal to the expected ones, matrix sizes consistent.
// Errors are kInvalidInput naming `source`.
StatusOr<MemberResult> DecodeJobResult(const std::string& bytes, const std::string& source,
                                       const std::string& expected_data_hash,
                                       const std::string& expected_config_hash);

}  // namespace chorus

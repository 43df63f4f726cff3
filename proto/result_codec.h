// Converting a trained member between common/'s MemberResult and the JobResult message, and
// storing it as a file. Thread safety: free functions, reentrant.
#pragma once

#include <string>

#include "common/member_training.h"
#include "common/status.h"

namespace chorus {

constexpr uint32_t kJobResultFormatVersion = 1;

// Serialises deterministically (same result => same bytes). widths are the network's widths.
std::string EncodeJobResult(const MemberResult& result, const std::vector<int>& widths,
                            const std::string& data_hash, const std::string& config_hash);

// Parses and checks: format version, hashes equal to the expected ones, matrix sizes consistent.
// Errors are kInvalidInput naming `source`.
StatusOr<MemberResult> DecodeJobResult(const std::string& bytes, const std::string& source,
                                       const std::string& expected_data_hash,
                                       const std::string& expected_config_hash);

}  // namespace chorus

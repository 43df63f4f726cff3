// For fuzz targets whose parser reads a file: the input written to one scratch file per process
// (under $TMPDIR, default /tmp), overwritten by each input and removed at exit.
// Thread safety: one fuzzing thread per process, as libFuzzer runs.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>

namespace chorus::fuzz {

// Writes data[0, size) to the scratch file with `suffix` and returns its path; aborts if the
// file cannot be written (the fuzzer cannot go on without it).
std::string WriteScratchFile(const uint8_t* data, size_t size, const std::string& suffix);

}  // namespace chorus::fuzz

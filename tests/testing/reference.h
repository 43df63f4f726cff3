// Running the Python reference scripts in tests/reference/ (Debian's python3 with numpy, scipy,
// scikit-learn, torch) and exchanging arrays with them through plain text files.
// Thread safety: not thread-safe (uses temporary files); call from one test thread.
#pragma once

#include <string>
#include <vector>

#include "common/matrix.h"

namespace chorus::testing {

// Runs CHORUS_REFERENCE_PYTHON tests/reference/<script> <args...>, returns its stdout.
// Fails the calling test (ADD_FAILURE) and returns "" if the script exits non-zero.
std::string RunReferenceScript(const std::string& script, const std::vector<std::string>& args);

// A fresh empty directory under the system temp dir, removed by the caller (or left for
// inspection on failure).
std::string MakeTempDir(const std::string& prefix);

// Writes a matrix as text: first line "rows cols", then one row per line, values printed with
// 17 significant digits. Reads the same format back.
void WriteMatrixText(const std::string& path, const MatrixD& m);
MatrixD ReadMatrixText(const std::string& path);

// Path of a file in the source tree.
std::string SourcePath(const std::string& relative);

}  // namespace chorus::testing

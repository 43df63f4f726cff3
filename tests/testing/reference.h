// Running the Python reference scripts in tests/reference/ (Debian's python3 with numpy, scipy,
// scikit-learn, torch) and exchanging arrays with them through plain text files.
// Thread safety: not thread-safe (uses temporary files); call from one test thread.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "common/matrix.h"
#include "common/rng.h"

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

// Parses the "name value [value ...]" lines a reference script prints.
std::map<std::string, std::vector<double>> ParseReferenceOutput(const std::string& text);

// Rows softmax(2 z) with z standard normal: confident but often wrong, like a real classifier.
MatrixD RandomProbabilities(int rows, int classes, Philox* rng);

// Labels uniform in [0, classes).
std::vector<int32_t> RandomLabels(int rows, int classes, Philox* rng);

// Path of a file in the source tree.
std::string SourcePath(const std::string& relative);

}  // namespace chorus::testing

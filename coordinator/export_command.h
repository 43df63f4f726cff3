// `chorus export BUNDLE --onnx FILE`: writes the bundle's calibrated predictive as one ONNX model
// (coordinator/onnx_export.h; layout in docs/onnx_export.md) that any ONNX runtime can serve.
// Thread safety: call from one thread.
#pragma once

#include <string>

namespace chorus {

struct ExportOptions {
  std::string bundle_path;
  std::string onnx_path;
};

// Returns the exit code: 0 written; 2 bad input (a missing, corrupt or unusable bundle, an output
// path whose directory is missing or cannot be written, a model over 2 GiB); 1 internal or I/O
// failure while writing. FILE appears only when complete (temp file + rename); on failure
// nothing is left behind. A summary goes to stderr (common/log_format.h).
int ExportCommand(const ExportOptions& options);

}  // namespace chorus

#include "coordinator/export_command.h"

#include <filesystem>
#include <memory>

#include "common/atomic_file.h"
#include "common/log_format.h"
#include "common/predictor.h"
#include "coordinator/onnx_export.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace export_command_detail {

// The output must name a file in an existing directory; checked before any work is done.
Status CheckOutputPath(const std::string& path) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (path.empty()) return Status::InvalidInput("--onnx: empty path");
  if (fs::is_directory(path, ec)) return Status::InvalidInput(path + ": is a directory, expected a file name");
  const fs::path parent = fs::path(path).parent_path();
  if (!parent.empty() && !fs::is_directory(parent, ec)) {
    return Status::InvalidInput(path + ": directory " + parent.string() + " does not exist");
  }
  return Status::Ok();
}

// A refusal about the bundle's contents, prefixed with the bundle's path.
Status AboutBundle(const std::string& path, const Status& st) {
  if (st.code() != Status::Code::kInvalidInput) return st;
  return Status::InvalidInput(path + ": " + st.message());
}

Status Export(const ExportOptions& o) {
  CHORUS_RETURN_IF_ERROR(CheckOutputPath(o.onnx_path));
  CHORUS_ASSIGN_OR_RETURN(const BundleFile file, ReadBundleFile(o.bundle_path));
  StatusOr<Predictor> predictor = Predictor::Create(file.bundle);
  if (!predictor.ok()) return AboutBundle(o.bundle_path, predictor.status());
  const StatusOr<std::string> model = OnnxModelBytes(file, predictor.value());
  if (!model.ok()) return AboutBundle(o.bundle_path, model.status());
  StatusOr<std::unique_ptr<AtomicFile>> out = AtomicFile::Create(o.onnx_path);
  // The directory exists, so a file that cannot be created there is the caller's to fix.
  if (!out.ok()) return Status::InvalidInput(out.status().message());
  CHORUS_RETURN_IF_ERROR(out.value()->Append(model.value()));
  CHORUS_RETURN_IF_ERROR(out.value()->Commit());
  const int64_t components = predictor.value().Components();
  const int64_t bytes = static_cast<int64_t>(model.value().size());
  LogLine(stderr, LogLevel::kInfo,
          o.onnx_path + ": ONNX model of " + std::to_string(components) + " components, " +
              std::to_string(bytes) + " bytes",
          {{"output", o.onnx_path}, {"components", components}, {"bytes", bytes}});
  return Status::Ok();
}

}  // namespace export_command_detail

int ExportCommand(const ExportOptions& options) {
  const Status st = export_command_detail::Export(options);
  if (st.ok()) return 0;
  LogLine(stderr, LogLevel::kError, "chorus export: " + st.ToString(), {{"cause", st.ToString()}});
  return st.ExitCode();
}

}  // namespace chorus

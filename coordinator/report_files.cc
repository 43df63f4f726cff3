#include "coordinator/report_files.h"

#include <utility>

#include "common/file_util.h"
#include "report/report_html.h"
#include "report/report_model.h"

namespace chorus {

using nlohmann::json;

Status WriteReportFiles(const std::string& run_dir, json report) {
  StatusOr<std::string> manifest_text =
      ReadFileToString(run_dir + "/manifest.json", kMaxReportBytes);
  if (manifest_text.ok()) {
    json manifest = json::parse(manifest_text.value(), nullptr, /*allow_exceptions=*/false);
    if (manifest.is_object()) report["manifest"] = std::move(manifest);
  }
  std::string html;
  try {
    html = ReportHtml(report);
  } catch (const json::exception& e) {
    return Status::InvalidInput(run_dir + "/report.json: " + e.what());
  }
  CHORUS_RETURN_IF_ERROR(WriteFileAtomic(run_dir + "/report.json", report.dump(2) + "\n"));
  return WriteFileAtomic(run_dir + "/report.html", html);
}

}  // namespace chorus

#include "coordinator/report_files.h"

#include <utility>

#include "common/file_util.h"
#include "report/report_html.h"
#include "report/report_model.h"

namespace chorus {

using nlohmann::json;

Status WriteReportFiles(const std::string& run_dir, json report) {
  for (const auto& [file, key] : {std::pair<const char*, const char*>{"/manifest.json", "manifest"},
                                  {"/hmc_reference.json", "hmc_reference"}}) {
    StatusOr<std::string> text = ReadFileToString(run_dir + file, kMaxReportBytes);
    if (!text.ok()) continue;
    json parsed = json::parse(text.value(), nullptr, /*allow_exceptions=*/false);
    if (parsed.is_object()) report[key] = std::move(parsed);
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

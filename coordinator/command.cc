#include "coordinator/command.h"

#include <memory>

#include "common/log_format.h"

namespace chorus {

void SetRunnerWithLogFormat(CLI::App* cmd, CommandRunner* runner, CommandRunner run, const std::string& more) {
  auto log_format = std::make_shared<std::string>("text");
  cmd->add_option("--log-format", *log_format,
                  "log lines on stderr: text, or json (one object per line: time, level, msg, fields" + more + ")")
      ->check(CLI::IsMember({"text", "json"}))
      ->capture_default_str();
  cmd->callback([runner, log_format, run = std::move(run)] {
    *runner = [log_format, run] {
      SetLogFormat(*log_format == "json" ? LogFormat::kJson : LogFormat::kText);
      return run();
    };
  });
}

}  // namespace chorus

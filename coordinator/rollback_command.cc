#include "coordinator/rollback_command.h"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <memory>
#include <optional>
#include <set>
#include <vector>

#include "common/log_format.h"
#include "coordinator/registry.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace rollback_command {

// The last few IDs of `versions`, for messages: "A, B, C" or "(none)".
std::string RecentIds(const std::vector<std::string>& versions) {
  constexpr size_t kShown = 5;
  std::string text;
  const size_t first = versions.size() > kShown ? versions.size() - kShown : 0;
  for (size_t i = first; i < versions.size(); ++i) text += (text.empty() ? "" : ", ") + versions[i];
  return text.empty() ? "(none)" : text;
}

// The version to switch to: `to` if it is kept; else the newest version older than `current`
// that no rollback has moved away from (so a version once rolled back is not returned to by
// accident when a later promotion is rolled back).
StatusOr<std::string> Target(const Registry& registry, const std::string& current, const std::string& to) {
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> versions, registry.Versions());
  if (!to.empty()) {
    if (std::find(versions.begin(), versions.end(), to) == versions.end()) {
      return Status::InvalidInput(registry.dir() + "/versions/" + to + ": no such version; the newest " +
                                  "kept: " + RecentIds(versions));
    }
    return to;
  }
  CHORUS_ASSIGN_OR_RETURN(const std::vector<Registry::Rollback> rollbacks, Registry::RollbacksIn(registry.dir()));
  std::set<std::string> left;  // versions earlier rollbacks moved away from
  for (const Registry::Rollback& r : rollbacks) left.insert(r.from);
  for (auto at = std::lower_bound(versions.begin(), versions.end(), current); at != versions.begin();) {
    --at;
    if (left.count(*at) == 0) return *at;
  }
  return Status::InvalidInput(registry.dir() + ": no version older than current (versions/" + current +
                              ") that a rollback has not already left; name one with --to (kept: " +
                              RecentIds(versions) + ")");
}

Status Rollback(const RollbackOptions& o, std::string* now_current) {
  CHORUS_RETURN_IF_ERROR(Registry::CheckIsRegistry(o.registry_dir));
  const auto on_wait = [] {
    LogLine(stderr, LogLevel::kInfo, "waiting for another promote or rollback to release the registry");
  };
  CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<Registry> registry, Registry::Open(o.registry_dir, on_wait));
  CHORUS_ASSIGN_OR_RETURN(const std::optional<std::string> current, registry->Current());
  if (!current.has_value()) {
    return Status::InvalidInput(o.registry_dir + ": no current version to roll back from");
  }
  CHORUS_ASSIGN_OR_RETURN(const std::string target, Target(*registry, *current, o.to));
  *now_current = target;
  if (target == *current) {
    LogLine(stderr, LogLevel::kInfo, "versions/" + target + " already is current", {{"current", target}});
    return Status::Ok();
  }
  const StatusOr<BundleFile> bundle = ReadBundleFile(registry->BundlePath(target));
  if (!bundle.ok()) {
    *now_current = *current;
    return Status::InvalidInput("not rolling back: " + bundle.status().message() + "; current stays versions/" +
                                *current);
  }
  CHORUS_RETURN_IF_ERROR(registry->SwitchCurrent(target));
  LogLine(stderr, LogLevel::kInfo, "rolled back: current -> versions/" + target + " (was " + *current + ")",
          {{"current", target}, {"previous", *current}});
  const Status recorded = registry->RecordRollback(*current, target, std::chrono::system_clock::now());
  if (!recorded.ok()) {
    return recorded.WithContext("current now is versions/" + target + ", but the rollback was not recorded");
  }
  return Status::Ok();
}

}  // namespace rollback_command

int RollbackCommand(const RollbackOptions& options) {
  std::string now_current;
  const Status st = rollback_command::Rollback(options, &now_current);
  if (!now_current.empty() && (st.ok() || st.code() == Status::Code::kIo)) {
    std::printf("%s\n", now_current.c_str());
  }
  if (!st.ok()) LogLine(stderr, LogLevel::kError, "chorus rollback: " + st.ToString());
  return st.ExitCode();
}

}  // namespace chorus

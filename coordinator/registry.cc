#include "coordinator/registry.h"

#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <sstream>

#include <nlohmann/json.hpp>

#include "common/file_util.h"
#include "common/log_format.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

namespace fs = std::filesystem;

constexpr char kStagingPrefix[] = ".staging-";
constexpr char kCurrentTempPrefix[] = "current.tmp-";

bool StartsWith(const std::string& s, const std::string& prefix) {
  return s.compare(0, prefix.size(), prefix) == 0;
}

bool Exists(const std::string& path) {
  struct stat st;
  return ::lstat(path.c_str(), &st) == 0;
}

// Makes a rename or creation inside `dir` durable.
Status SyncDirectory(const std::string& dir) {
  const int fd = ::open(dir.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) return Status::Io(dir + ": cannot open: " + ErrnoText());
  const bool ok = ::fsync(fd) == 0;
  const std::string error = ok ? "" : ErrnoText();
  ::close(fd);
  return ok ? Status::Ok() : Status::Io(dir + ": fsync failed: " + error);
}

// Names in `dir` (sorted), or an error naming it.
StatusOr<std::vector<std::string>> ListNames(const std::string& dir) {
  std::error_code ec;
  std::vector<std::string> names;
  for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    names.push_back(it->path().filename().string());
  }
  if (ec) return Status::Io(dir + ": cannot list: " + ec.message());
  std::sort(names.begin(), names.end());
  return names;
}

Status Remove(const std::string& path) {
  std::error_code ec;
  fs::remove_all(path, ec);
  return ec ? Status::Io(path + ": cannot remove: " + ec.message()) : Status::Ok();
}

Status RemoveLeftovers(const std::string& dir) {
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> versions, ListNames(dir + "/versions"));
  for (const std::string& name : versions) {
    if (StartsWith(name, kStagingPrefix)) CHORUS_RETURN_IF_ERROR(Remove(dir + "/versions/" + name));
  }
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> top, ListNames(dir));
  for (const std::string& name : top) {
    if (StartsWith(name, kCurrentTempPrefix)) CHORUS_RETURN_IF_ERROR(Remove(dir + "/" + name));
  }
  return Status::Ok();
}

StatusOr<int> LockFile(const std::string& path, const std::function<void()>& on_wait) {
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) return Status::Io(path + ": cannot open: " + ErrnoText());
  if (::flock(fd, LOCK_EX | LOCK_NB) == 0) return fd;
  int rc = -1;
  if (errno == EWOULDBLOCK) {
    if (on_wait) on_wait();
    while ((rc = ::flock(fd, LOCK_EX)) != 0 && errno == EINTR) {
    }
  }
  if (rc == 0) return fd;
  const std::string error = ErrnoText();
  ::close(fd);
  return Status::Io(path + ": cannot lock: " + error);
}

bool ValidId(const std::string& id) {
  return !id.empty() && id[0] != '.' && id.find('/') == std::string::npos;
}

}  // namespace

StatusOr<std::unique_ptr<Registry>> Registry::Open(const std::string& dir,
                                                   const std::function<void()>& on_wait) {
  CHORUS_RETURN_IF_ERROR(MakeDirectories(dir + "/versions"));
  CHORUS_RETURN_IF_ERROR(MakeDirectories(dir + "/refused"));
  CHORUS_ASSIGN_OR_RETURN(const int fd, LockFile(dir + "/.lock", on_wait));
  std::unique_ptr<Registry> registry(new Registry(dir, fd));
  CHORUS_RETURN_IF_ERROR(RemoveLeftovers(dir));
  return registry;
}

Registry::~Registry() { ::close(lock_fd_); }

Status Registry::CheckIsRegistry(const std::string& dir) {
  if (fs::is_directory(dir + "/versions")) return Status::Ok();
  return Status::InvalidInput(dir + ": not a registry (no versions/ directory)");
}

StatusOr<std::optional<std::string>> Registry::CurrentIn(const std::string& dir) {
  const std::string link = dir + "/current";
  struct stat st;
  if (::lstat(link.c_str(), &st) != 0) {
    if (errno == ENOENT) return std::optional<std::string>();
    return Status::Io(link + ": " + ErrnoText());
  }
  std::error_code ec;
  const std::string target = S_ISLNK(st.st_mode) ? fs::read_symlink(link, ec).string() : "";
  const std::string id = StartsWith(target, "versions/") ? target.substr(9) : "";
  if (ec || !ValidId(id)) {
    return Status::InvalidInput(link + ": not a symlink to versions/ID (found \"" + target + "\")");
  }
  if (!Exists(dir + "/versions/" + id + "/bundle.chorus")) {
    return Status::InvalidInput(link + ": points at " + target + ", which has no bundle.chorus");
  }
  return std::optional<std::string>(id);
}

std::string Registry::NewId(const std::string& payload_sha256,
                            std::chrono::system_clock::time_point now) const {
  const std::time_t seconds = std::chrono::system_clock::to_time_t(now);
  const auto millis = std::chrono::duration_cast<std::chrono::milliseconds>(
                          now - std::chrono::system_clock::from_time_t(seconds))
                          .count();
  std::tm utc{};
  gmtime_r(&seconds, &utc);
  char time_text[32], millis_text[8];
  std::strftime(time_text, sizeof time_text, "%Y%m%dT%H%M%S", &utc);
  std::snprintf(millis_text, sizeof millis_text, ".%03dZ", static_cast<int>(millis));
  const std::string base =
      std::string(time_text) + millis_text + "-" + payload_sha256.substr(0, 12);
  std::string id = base;
  for (int n = 2; Exists(VersionDir(id)) || Exists(dir_ + "/refused/" + id + ".json"); ++n) {
    id = base + "-" + std::to_string(n);
  }
  return id;
}

Status Registry::AddVersion(const std::string& id, const std::string& bundle_bytes,
                            const std::string& payload_sha256,
                            const std::vector<std::pair<std::string, std::string>>& files) {
  const std::string staging =
      dir_ + "/versions/" + kStagingPrefix + id + "-" + std::to_string(::getpid());
  CHORUS_RETURN_IF_ERROR(MakeDirectories(staging));
  Status st = WriteFileAtomic(staging + "/bundle.chorus", bundle_bytes);
  for (size_t i = 0; st.ok() && i < files.size(); ++i) {
    st = WriteFileAtomic(staging + "/" + files[i].first, files[i].second);
  }
  if (st.ok()) {
    const StatusOr<BundleFile> copy = ReadBundleFile(staging + "/bundle.chorus");
    if (!copy.ok() || copy.value().payload_sha256 != payload_sha256) {
      st = Status::Internal(staging + "/bundle.chorus: the copy does not verify" +
                            (copy.ok() ? std::string() : ": " + copy.status().message()));
    }
  }
  if (st.ok()) st = SyncDirectory(staging);
  if (st.ok() && std::rename(staging.c_str(), VersionDir(id).c_str()) != 0) {
    st = Status::Io(VersionDir(id) + ": rename failed: " + ErrnoText());
  }
  if (!st.ok()) {
    Remove(staging);  // best effort; the next Open removes it otherwise
    return st;
  }
  return SyncDirectory(dir_ + "/versions");
}

Status Registry::SwitchCurrent(const std::string& id) {
  const std::string temp = dir_ + "/" + kCurrentTempPrefix + std::to_string(::getpid());
  ::unlink(temp.c_str());
  if (::symlink(("versions/" + id).c_str(), temp.c_str()) != 0) {
    return Status::Io(temp + ": cannot create symlink: " + ErrnoText());
  }
  CrashPointForTest("before_switch_rename");
  if (std::rename(temp.c_str(), (dir_ + "/current").c_str()) != 0) {
    const std::string error = ErrnoText();
    ::unlink(temp.c_str());
    return Status::Io(dir_ + "/current: rename failed: " + error);
  }
  return SyncDirectory(dir_);
}

Status Registry::RecordRefusal(const std::string& id, const std::string& decision_json) {
  return WriteFileAtomic(dir_ + "/refused/" + id + ".json", decision_json);
}

StatusOr<std::vector<std::string>> Registry::VersionsIn(const std::string& dir) {
  CHORUS_ASSIGN_OR_RETURN(std::vector<std::string> versions, ListNames(dir + "/versions"));
  versions.erase(std::remove_if(versions.begin(), versions.end(),
                                [](const std::string& id) { return !ValidId(id); }),
                 versions.end());
  return versions;
}

Status Registry::RecordRollback(const std::string& from, const std::string& to,
                                std::chrono::system_clock::time_point now) {
  const nlohmann::json line = {{"time", Rfc3339(now)}, {"from", from}, {"to", to}};
  return AppendLine(dir_ + "/rollbacks.jsonl", line.dump());
}

StatusOr<std::vector<Registry::Rollback>> Registry::RollbacksIn(const std::string& dir) {
  const std::string path = dir + "/rollbacks.jsonl";
  std::vector<Rollback> records;
  if (!Exists(path)) return records;
  CHORUS_ASSIGN_OR_RETURN(const std::string text, ReadFileToString(path));
  std::istringstream lines(text);
  int number = 0;
  for (std::string line; std::getline(lines, line);) {
    ++number;
    const nlohmann::json j = nlohmann::json::parse(line, nullptr, false);
    const auto text_field = [&](const char* key) { return j.is_object() && j.contains(key) && j[key].is_string(); };
    if (!text_field("time") || !text_field("from") || !text_field("to")) {
      return Status::InvalidInput(path + ":" + std::to_string(number) +
                                  ": expected {\"time\", \"from\", \"to\"} as chorus rollback writes");
    }
    records.push_back({j["time"].get<std::string>(), j["from"].get<std::string>(), j["to"].get<std::string>()});
  }
  return records;
}

StatusOr<std::vector<std::string>> Registry::Prune(int keep) {
  CHORUS_ASSIGN_OR_RETURN(const std::optional<std::string> current, Current());
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> versions, Versions());
  std::vector<std::string> removed;
  for (size_t i = 0; i + keep < versions.size(); ++i) {
    if (versions[i] == current) continue;
    CHORUS_RETURN_IF_ERROR(Remove(VersionDir(versions[i])));
    removed.push_back(versions[i]);
  }
  CHORUS_ASSIGN_OR_RETURN(const std::vector<std::string> refused, ListNames(dir_ + "/refused"));
  for (size_t i = 0; i + keep < refused.size(); ++i) {
    CHORUS_RETURN_IF_ERROR(Remove(dir_ + "/refused/" + refused[i]));
  }
  return removed;
}

void CrashPointForTest(const char* stage) {
  const char* at = std::getenv("CHORUS_PROMOTE_CRASH_AT");
  if (at != nullptr && std::strcmp(at, stage) == 0) std::raise(SIGKILL);
}

}  // namespace chorus
